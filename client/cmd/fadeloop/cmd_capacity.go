package main

import (
	"context"
	"flag"
	"io"
	"math"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
	"github.com/fadeloop/fadeloop/loop/multicell"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

func init() {
	register(&command{
		order:   31,
		name:    "capacity",
		summary: "find the most users a setting carries at an outage limit, beside the pole capacity",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Bisects the user count of one group (--group) of the scenario (the file, or
the built-in default) for the largest count whose mean aggregate outage
over --replications stays at or below --outage-limit, with the same seeds at
every count (common random numbers). Without --max-count the search doubles
upward from --min-count until a count fails. The analytic pole capacity
(Gilhousen et al. 1991) and the pole of the engine's own interference
equation are printed beside the simulated figure. On a layout (multi-cell)
the counts are users per cell, feasibility is not computed, and the poles
are one cell's with the other-cell ratio f the layout measured at the
capacity count. A count whose interval contains a limit gets a caution. The group's placement
must be uniform. Without --max-count the worst case (doubling up to the
server's user limit, see "fadeloop info") is what the server's cost bound
is checked against, and it often exceeds it: give --max-count or --max-user-slots.

A --request file is the protojson form (JSON or YAML) of
fadeloop.v1.CapacityRequest; flags override its fields.

Output formats:
  table  the capacity, the pole estimates with their inputs, every
         evaluated count with its figures, the reason and the effort
  csv    one row per evaluated count: count, total_users, pass, outage_ok,
         noise_rise_ok, load_feasible, capacity (true|false), n, then for
         every figure F of sir_error_mean_db, sir_error_std_db,
         outage_probability, achieved_bler, tx_power_mean_dbm,
         max_power_fraction, noise_rise_mean_db its mean F, F_ci_low and
         F_ci_high (its 95 % interval, suffixed as in "run" and "sweep").
         Multi-cell (layout.sites set): the users column holds users per
         cell and is named users_per_cell (it was total_users), layout_users
         (per cell × cells) follows it, and load_feasible is empty: the
         multi-cell engine computes no feasibility
  json   the fadeloop.v1 CapacityResult in protojson with proto field names

` + searchQueueHelp + `

Exit status 4 (after the output is written) when even the smallest count
tried exceeds the outage limit.

Examples:
  fadeloop capacity --outage-limit 0.2 --max-count 256
  fadeloop capacity testdata/scenarios/indoor_outer_loop.yaml --outage-limit 0.05 --max-count 256
  fadeloop capacity cell.yaml --group 1 --outage-limit 0.02 --max-count 200 \
      --replications 8 --format csv --out capacity.csv`,
		run: runCapacity,
	})
}

func runCapacity(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	ov.registerSlotsSeed(fs)
	request := fs.String("request", "", "capacity request `FILE` (protojson CapacityRequest in JSON or YAML)")
	group := fs.Int("group", 0, "index `G` of the group whose count is scaled (0: the first)")
	outage := fs.Float64("outage-limit", 0, "largest acceptable aggregate outage `P` (fraction, e.g. 0.05); required")
	minCount := fs.Int("min-count", 0, "smallest group count `N` tried (0: 1)")
	maxCount := fs.Int("max-count", 0, "largest group count `N` tried (0: double upward until a count fails)")
	reps := fs.Int("replications", 0, "replications `N` per evaluated count (0: 4)")
	confidence := fs.Float64("confidence", 0, "confidence `C` of the intervals (0: 0.95)")
	maxUS := fs.Int64("max-user-slots", 0, "budget `N` of simulated users × slots (0: none)")
	reportFile := fs.String("report", "", "also write the HTML report (verdict, tables, plots) to `FILE.html`")
	var qf sweepQueueFlags
	qf.registerRun(fs, "capacity")
	return func(ctx context.Context, args []string) error {
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if err := checkReportPath(*reportFile); err != nil {
			return err
		}
		req := &pb.CapacityRequest{}
		sf, reqFile, err := loadRequest(*request, req, &req.Base, args, &ov)
		if err != nil {
			return err
		}
		for _, x := range []struct {
			dst  *int32
			v    int
			name string
		}{{&req.MinCount, *minCount, "min-count"}, {&req.MaxCount, *maxCount, "max-count"}, {&req.Replications, *reps, "replications"}} {
			if x.v < 0 || x.v > math.MaxInt32 {
				return badInputf("--%s %d: must be >= 0", x.name, x.v)
			}
			if x.v != 0 {
				*x.dst = int32(x.v)
			}
		}
		if *group < 0 || *group > math.MaxInt32 {
			return badInputf("--group %d: must be a group index, 0 or more", *group)
		}
		req.Group = int32(*group)
		if *outage != 0 {
			req.OutageLimit = *outage
		}
		if req.OutageLimit == 0 {
			return badInputf("--outage-limit is required (the largest acceptable outage, e.g. 0.05)")
		}
		if *confidence != 0 {
			req.Confidence = *confidence
		}
		if *maxUS != 0 {
			req.MaxUserSlots = *maxUS
		}
		out, cl, release, job, err := e.searchSession(ctx, &qf, "capacity", service.CapacityRequestFromProto(req))
		if err != nil {
			return err
		}
		defer release()
		prog := e.newProgress("user-slots/s")
		res, err := cl.Capacity(ctx, req, searchProgress(prog))
		stopProgress(prog, err == nil)
		if err != nil {
			return searchError(sf, reqFile, job.stopped(ctx, e, err))
		}
		err = e.emit(out, res, func(w io.Writer) error { return render.CapacityCSV(w, req, res) },
			func(w io.Writer) { render.CapacityTable(w, req, res) })
		if err != nil {
			return err
		}
		in := htmlreport.Input{Capacity: res, CapacityRequest: req, Source: "fadeloop capacity"}
		if *reportFile != "" {
			if in.EngineVersion, err = searchEngine(ctx, e, &qf, cl, render.CapacityIsLayout(req)); err != nil {
				return err
			}
		}
		if err := writeResultReport(e, *reportFile, in); err != nil {
			return err
		}
		if res.GetBelowRange() {
			// Even the smallest count tried exceeds the outage limit.
			return constraintsUnmet{reason: res.GetReason()}
		}
		return nil
	}
}

// searchEngine is the engine version for a capacity or tune report (their
// results do not carry one). Single cell: the server's (GetServerInfo; in
// process, this program's). Multi-cell: the multi-cell engine's version
// (this program's when the replications ran in this process, else the
// server's GetServerInfo multicell_engine_version; "" — not recorded —
// from servers that predate that field).
func searchEngine(ctx context.Context, e *env, qf *sweepQueueFlags, cl *client.Client, layout bool) (string, error) {
	inProcess := e.g.server == "" && (qf.direct || qf.local())
	if layout && inProcess {
		return multicell.EngineVersion, nil
	}
	info, err := cl.ServerInfo(ctx)
	if err != nil {
		return "", err
	}
	v := info.GetEngineVersion()
	if layout {
		// The server's multi-cell engine ("" from servers that predate
		// the field: shown as not recorded).
		v = info.GetMulticellEngineVersion()
		if v == "" {
			return "", nil
		}
	}
	if !inProcess && e.g.server == "" {
		v += " (this program's; the queue's workers ran the replications)"
	}
	return v, nil
}

package main

import (
	"context"
	_ "embed"
	"encoding/csv"
	"encoding/json"
	"flag"
	"fmt"
	"runtime"
	"runtime/debug"
	"strconv"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// canonicalJSON is a copy of testdata/scenarios/canonical.json (a test
// keeps the two identical): 64 users, 3 taps, 30 km/h at 2 GHz, 1500 Hz,
// 90 000 slots.
//
//go:embed canonical.json
var canonicalJSON []byte

func init() {
	register(&command{
		order:   80,
		name:    "bench",
		summary: "measure simulation throughput (user-slots/s, path-samples/s) on the canonical scenario",
		usage:   "[SCENARIO.yaml|.json]",
		details: `Runs the canonical benchmark scenario (64 users, 3 Rayleigh taps, 30 km/h at
2 GHz, 1500 Hz 1-bit loop, 90 000 slots; or the given file) --repeat times
and prints the throughput of each run and the best: user-slots per second
(users × slots simulated, warm-up included, per second of wall time) and
path-samples per second (user-slots/s × taps per user: fading path samples
generated and used). Against --server it measures that server, RPC
included; embedded, this process.

Output formats: table; csv with columns run, users, taps_per_user,
user_slots, wall_time_s, user_slots_per_s, path_samples_per_s; json.

Examples:
  fadeloop bench
  fadeloop bench --repeat 5
  fadeloop --server 127.0.0.1:8470 bench --slots 30000`,
		run: runBench,
	})
	register(&command{
		order:   90,
		name:    "example",
		summary: "write a commented example scenario (YAML) to start from",
		usage:   "",
		details: `Writes the built-in default scenario, with a comment on every setting, as
YAML (or, with --format json, as protojson). Edit it and pass it to run,
sweep, tune, capacity or bench.

With --multi-cell, writes a multi-cell example instead: an invented harbour
town on 7 three-sector sites with soft handover (layout section).

Examples:
  fadeloop example > cell.yaml
  fadeloop example --format json --out cell.json
  fadeloop example --multi-cell > town.yaml`,
		run: runExample,
	})
	register(&command{
		order:   100,
		name:    "version",
		summary: "print the version of this program",
		usage:   "",
		details: `Prints the module version and VCS revision this binary was built from, the Go
version and the API package. With --server, also whether the server
answers its health check.

Examples:
  fadeloop version
  fadeloop --server 127.0.0.1:8470 version`,
		run: runVersion,
	})
}

type benchRun struct {
	Run             int     `json:"run"`
	Users           int     `json:"users"`
	TapsPerUser     float64 `json:"taps_per_user"`
	UserSlots       int64   `json:"user_slots"`
	WallTimeS       float64 `json:"wall_time_s"`
	UserSlotsPerS   float64 `json:"user_slots_per_s"`
	PathSamplesPerS float64 `json:"path_samples_per_s"`
}

func runBench(e *env, fs *flag.FlagSet) action {
	var ov scenarioOverrides
	ov.register(fs)
	repeat := fs.Int("repeat", 3, "number of runs `N`; the best is reported")
	return func(ctx context.Context, args []string) error {
		var err error
		if err := e.g.checkFormat("table", "csv", "json"); err != nil {
			return err
		}
		if *repeat < 1 {
			return badInputf("--repeat %d: must be >= 1", *repeat)
		}
		var sf *client.ScenarioFile
		if len(args) == 0 {
			sf, err = client.ParseScenario("canonical scenario (built in)", canonicalJSON)
		} else {
			sf, err = loadScenario(args)
		}
		if err != nil {
			return err
		}
		sc := proto.Clone(sf.Scenario).(*pb.Scenario)
		if err := ov.apply(sc); err != nil {
			return err
		}
		out, cl, release, err := e.session()
		if err != nil {
			return err
		}
		defer release()
		var taps float64
		var runs []benchRun
		for i := range *repeat {
			prog := e.newProgress("user-slots/s")
			rep, err := cl.Simulate(ctx, &pb.SimulateRequest{Scenario: sc}, func(p *pb.Progress) { prog.update(p.GetFractionDone(), p.GetUserSlotsPerS()) })
			prog.done()
			if err != nil {
				return locate(sf, "scenario", &ov, err)
			}
			if i == 0 {
				if taps, err = tapsPerUser(rep); err != nil {
					return err
				}
			}
			r := benchRun{Run: i + 1, Users: int(rep.GetAggregate().GetUsers()), TapsPerUser: taps,
				UserSlots: rep.GetSimulatedUserSlots(), WallTimeS: rep.GetWallTimeS(), UserSlotsPerS: rep.GetUserSlotsPerS()}
			r.PathSamplesPerS = r.UserSlotsPerS * taps
			runs = append(runs, r)
		}
		best := runs[0]
		for _, r := range runs {
			if r.UserSlotsPerS > best.UserSlotsPerS {
				best = r
			}
		}
		w := out.Writer()
		switch e.g.format {
		case "json":
			b, err := json.MarshalIndent(struct {
				Scenario string     `json:"scenario"`
				Runs     []benchRun `json:"runs"`
				Best     benchRun   `json:"best"`
			}{sc.GetName(), runs, best}, "", "  ")
			if err != nil {
				return err
			}
			fmt.Fprintf(w, "%s\n", b)
		case "csv":
			cw := csv.NewWriter(w)
			cw.Write([]string{"run", "users", "taps_per_user", "user_slots", "wall_time_s", "user_slots_per_s", "path_samples_per_s"})
			for _, r := range runs {
				cw.Write([]string{strconv.Itoa(r.Run), strconv.Itoa(r.Users), render.CSVNum(r.TapsPerUser), strconv.FormatInt(r.UserSlots, 10),
					render.CSVNum(r.WallTimeS), render.CSVNum(r.UserSlotsPerS), render.CSVNum(r.PathSamplesPerS)})
			}
			cw.Flush()
		default:
			where := "embedded server (this process)"
			if e.g.server != "" {
				where = "server " + e.g.server
			}
			if e.g.server == "" {
				where += fmt.Sprintf(", GOMAXPROCS %d", runtime.GOMAXPROCS(0))
			}
			fmt.Fprintf(w, "%s — %s\n\n", sc.GetName(), where)
			t := render.NewTable("run", "users", "user-slots", "wall time (s)", "user-slots/s", "path-samples/s").AlignRight(0, 1, 2, 3, 4, 5)
			for _, r := range runs {
				t.Add(strconv.Itoa(r.Run), strconv.Itoa(r.Users), render.GroupDigits(r.UserSlots), render.Num(r.WallTimeS, 3),
					render.FmtRate(r.UserSlotsPerS, ""), render.FmtRate(r.PathSamplesPerS, ""))
			}
			t.Write(w)
			fmt.Fprintf(w, "\nbest: %s, %s (%.3g taps per user)\n", render.FmtRate(best.UserSlotsPerS, "user-slots/s"),
				render.FmtRate(best.PathSamplesPerS, "path-samples/s"), taps)
		}
		return out.commit()
	}
}

// tapsPerUser is the mean number of fading paths per user: each group's
// taps as the run report states them (group_fingers), weighted by the
// group's user count in the normalised scenario.
func tapsPerUser(rep *pb.RunReport) (float64, error) {
	groups := rep.GetNormalisedScenario().GetGroups()
	users, paths := 0, 0
	for _, gf := range rep.GetGroupFingers() {
		if g := int(gf.GetGroup()); g >= 0 && g < len(groups) {
			n := int(groups[g].GetCount())
			users += n
			paths += n * int(gf.GetTaps())
		}
	}
	if users == 0 {
		return 0, fmt.Errorf("the run report states no taps per group (group_fingers); is the server older than this client?")
	}
	return float64(paths) / float64(users), nil
}

func runExample(e *env, fs *flag.FlagSet) action {
	multi := fs.Bool("multi-cell", false, "write the multi-cell example (a layout of sites with soft handover)")
	return func(_ context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		if err := e.g.checkFormat("table", "yaml", "json"); err != nil {
			return badInputf("--format %q: example writes yaml (the default) or json", e.g.format)
		}
		out, err := e.openOutput()
		if err != nil {
			return err
		}
		defer out.discard()
		name, yaml := defaultScenarioName, defaultScenarioYAML
		if *multi {
			name, yaml = multiCellScenarioName, multiCellScenarioYAML
		}
		if e.g.format == "json" {
			sf, err := client.ParseScenario(name, yaml)
			if err != nil {
				return err
			}
			b, err := client.MarshalScenarioJSON(sf.Scenario)
			if err != nil {
				return err
			}
			out.Writer().Write(b)
		} else {
			out.Writer().Write(yaml)
		}
		return out.commit()
	}
}

// version is set at build time with -ldflags "-X main.version=v1.2.3";
// otherwise the module build information is used.
var version = ""

func runVersion(e *env, fs *flag.FlagSet) action {
	return func(ctx context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		fmt.Fprintf(e.stdout, "fadeloop %s\n%s %s/%s, API fadeloop.v1\n", versionString(), runtime.Version(), runtime.GOOS, runtime.GOARCH)
		if e.g.server != "" {
			cl, err := e.connect()
			if err != nil {
				return err
			}
			defer cl.Close()
			st, err := cl.Health(ctx)
			if err != nil {
				return err
			}
			fmt.Fprintf(e.stdout, "server %s: %s\n", e.g.server, st)
		}
		return nil
	}
}

// versionString is the program's version: the one set at build time, else
// the module's, with the VCS revision when known.
func versionString() string {
	v, rev := version, ""
	if bi, ok := debug.ReadBuildInfo(); ok {
		if v == "" {
			v = bi.Main.Version
		}
		for _, s := range bi.Settings {
			if s.Key == "vcs.revision" {
				rev = s.Value
			}
		}
	}
	if v == "" {
		v = "(devel)"
	}
	if rev != "" {
		v += " (" + rev[:min(12, len(rev))] + ")"
	}
	return v
}

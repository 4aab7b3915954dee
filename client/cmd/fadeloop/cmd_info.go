package main

import (
	"context"
	"flag"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/loop/multicell"
)

func init() {
	register(&command{
		order:   95,
		name:    "info",
		summary: "print the server's versions, limits and built-in channel profiles",
		usage:   "",
		details: `Asks the server (or the embedded one) for its engine and API versions, the
limits it enforces on requests (users, groups, grid points, axis values,
traced users, message sizes, work per call) and its built-in tap-delay
profiles with their taps. The user limit is per scenario, and per cell
(the sum of the groups' counts) in a layout.

The multi-cell (layout) limits follow under their own heading: the
server's answer does not carry them, so they are this client's build of
the multi-cell engine (package loop/multicell), which is the server's own
only when both are the same build (compare the multi-cell engine version
line; the embedded server always is).

Output formats: table; json (the fadeloop.v1 GetServerInfoResponse).

Examples:
  fadeloop info
  fadeloop --server 127.0.0.1:7443 info --format json`,
		run: runInfo,
	})
}

func runInfo(e *env, _ *flag.FlagSet) action {
	return func(ctx context.Context, args []string) error {
		if err := noArgs(args); err != nil {
			return err
		}
		if err := e.g.checkFormat("table", "json"); err != nil {
			return err
		}
		out, _, release, info, err := e.infoSession(ctx)
		if err != nil {
			return err
		}
		defer release()
		w := out.Writer()
		if e.g.format == "json" {
			b, err := render.MarshalJSON(info)
			if err != nil {
				return err
			}
			w.Write(b)
			return out.commit()
		}
		fmt.Fprintf(w, "engine %s, API %s\n", info.GetEngineVersion(), info.GetApiVersion())
		if v := info.GetMulticellEngineVersion(); v != "" {
			fmt.Fprintf(w, "multi-cell engine %s (scenarios with layout.sites set)\n", v)
		}
		fmt.Fprintln(w)
		l := info.GetLimits()
		t := render.NewTable("limit", "value").AlignRight(1)
		for _, r := range []struct {
			name string
			v    int64
		}{
			{"users per scenario (layout: per cell)", int64(l.GetMaxUsers())},
			{"groups per scenario", int64(l.GetMaxGroups())},
			{"slots per replication", l.GetMaxSlots()},
			{"grid points", int64(l.GetMaxGridPoints())},
			{"values per axis", int64(l.GetMaxAxisValues())},
			{"traced users per run", int64(l.GetMaxTracedUsers())},
			{"received message (bytes)", l.GetMaxRecvMessageBytes()},
			{"sent message (bytes)", l.GetMaxSendMessageBytes()},
			{"work per call (tap-slots)", l.GetMaxCostTapSlots()},
		} {
			t.Add(r.name, render.GroupDigits(r.v))
		}
		t.Write(w)
		fmt.Fprintln(w)
		writeMulticellLimits(w)
		fmt.Fprintln(w)
		pt := render.NewTable("profile", "taps", "delays (ns)", "powers (dB)").AlignRight(1)
		for _, p := range info.GetProfiles() {
			var d, pw []string
			for _, tp := range p.GetTaps() {
				d = append(d, strconv.FormatFloat(tp.GetDelayNs(), 'g', -1, 64))
				pw = append(pw, strconv.FormatFloat(tp.GetPowerDb(), 'g', -1, 64))
			}
			pt.Add(p.GetName(), strconv.Itoa(len(p.GetTaps())), strings.Join(d, " "), strings.Join(pw, " "))
		}
		pt.Write(w)
		return out.commit()
	}
}

// writeMulticellLimits writes the multi-cell engine's limits as this
// build defines them (loop/multicell): GetServerInfoResponse has no field
// for them.
func writeMulticellLimits(w io.Writer) {
	fmt.Fprintf(w, "multi-cell limits of this client's engine %s (not in the server's answer):\n", multicell.EngineVersion)
	t := render.NewTable("limit", "value").AlignRight(1)
	t.Add("users in a layout (all cells)", render.GroupDigits(multicell.MaxUsers))
	t.Add("users per cell in one group (count)", render.GroupDigits(multicell.MaxGroupSize))
	t.Add("users × cells with FAST_FADING_FULL", render.GroupDigits(multicell.MaxFullFadingLinks))
	t.Add("slots per replication", render.GroupDigits(int64(multicell.MaxSlots)))
	t.Write(w)
}

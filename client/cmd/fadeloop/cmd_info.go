package main

import (
	"context"
	"flag"
	"fmt"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/render"
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
profiles with their taps.

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
			{"users per scenario", int64(l.GetMaxUsers())},
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

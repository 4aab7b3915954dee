package main

import (
	"context"
	"flag"
	"fmt"
	"os"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/client"
	htmlreport "github.com/fadeloop/fadeloop/client/report"
)

func init() {
	register(&command{
		order:   75,
		name:    "report",
		summary: "write a result (RESULT.json of run, sweep, tune or capacity) as one self-contained HTML page",
		usage:   "RESULT.json",
		details: `Reads a result written by run, sweep, tune or capacity with --format json and
writes one HTML file with everything inline: the verdict first, every figure
with its confidence interval, the plots (inline SVG, the same as --plot), the
candidates of a tuning run, the effort, the seed and engine version for
reproduction, the scenario as a table and as JSON, and the caution about real
transmitters. It opens with no network access, needs no JavaScript and prints
on landscape A4.

Sweep, tune and capacity results do not carry their scenario: give it with
--scenario to have it in the report.

Examples:
  fadeloop run cell.yaml --format json --out result.json
  fadeloop report result.json --out report.html
  fadeloop report tune.json --scenario cell.yaml --title "step size for the bus route" --out tune.html`,
		run: runReport,
	})
}

func runReport(e *env, fs *flag.FlagSet) action {
	scenario := fs.String("scenario", "", "scenario `FILE` (JSON or YAML) to show with a sweep, tune or capacity result")
	title := fs.String("title", "", "page `TITLE` (default: the scenario's name)")
	return func(_ context.Context, rest []string) error {
		return writeHTMLReport(e, rest, *scenario, *title)
	}
}

// writeHTMLReport reads one result file and writes its HTML report.
func writeHTMLReport(e *env, rest []string, scenario, title string) error {
	if len(rest) != 1 {
		return badInputf("report takes one RESULT.json (got %d arguments: %s)", len(rest), strings.Join(rest, " "))
	}
	f, err := os.Open(rest[0])
	if err != nil {
		return badInput{err}
	}
	defer f.Close()
	in, err := htmlreport.ReadResult(f)
	if err != nil {
		return badInputf("%s: %v", rest[0], err)
	}
	in.Source, in.Title, in.Created = rest[0], title, time.Now()
	if scenario != "" {
		sf, err := client.LoadScenarioFile(scenario)
		if err != nil {
			return badInputf("--scenario %s: %v", scenario, err)
		}
		in.Scenario = sf.Scenario
		if in.Sweep != nil {
			in.Sweep.Base = sf.Scenario
		}
	}
	out, err := e.openOutput()
	if err != nil {
		return err
	}
	defer out.discard()
	if err := htmlreport.Write(out.Writer(), in); err != nil {
		return err
	}
	if err := out.commit(); err != nil {
		return err
	}
	if !e.g.quiet && e.g.out != "" && e.g.out != "-" {
		fmt.Fprintf(e.stderr, "wrote report to %s\n", e.g.out)
	}
	return nil
}

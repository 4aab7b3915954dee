package report

import (
	"bytes"
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"golang.org/x/net/html"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	clirender "github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// The fixtures in testdata/ are real outputs of the CLI:
//
//	fadeloop run testdata/scenarios/near_far_stress.yaml --slots 3000 --trace-points 300 --plot traces=t.svg --format json --out run.json
//	fadeloop sweep testdata/scenarios/dense_urban_macro.json --slots 1500 --axis inner_loop.step_db=0.5,1,2 --axis 'groups[1].speeds[0].speed_kmh=30,90' --format json --out sweep.json
//	fadeloop sweep testdata/scenarios/small.json --slots 1500 --axis inner_loop.step_db=0.5,1,2 --axis inner_loop.update_rate_hz=750,1500 --format json --out sweep_heat.json
//	fadeloop tune testdata/scenarios/small.json --slots 1500 --axis inner_loop.step_db=0.5,1,2 --speeds 3,60 --max-reps 8 --format json --out tune.json
//	fadeloop capacity testdata/scenarios/indoor_outer_loop.yaml --outage-limit 0.05 --max-count 256 --slots 1500 --format json --out cap.json
var outDir = flag.String("out", "", "also write the rendered reports into this directory (to look at them)")

func readFixture(t *testing.T, name string) Input {
	t.Helper()
	f, err := os.Open(filepath.Join("testdata", name))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	in, err := ReadResult(f)
	if err != nil {
		t.Fatalf("ReadResult(%s): %v", name, err)
	}
	in.Source = name
	return in
}

func render(t *testing.T, in Input) string {
	t.Helper()
	var b bytes.Buffer
	if err := Write(&b, in); err != nil {
		t.Fatalf("Write: %v", err)
	}
	return b.String()
}

// walk calls fn on every element node of the parsed page.
func walk(n *html.Node, fn func(*html.Node)) {
	if n.Type == html.ElementNode {
		fn(n)
	}
	for c := n.FirstChild; c != nil; c = c.NextSibling {
		walk(c, fn)
	}
}

func text(n *html.Node) string {
	var b strings.Builder
	var rec func(*html.Node)
	rec = func(n *html.Node) {
		if n.Type == html.TextNode {
			b.WriteString(n.Data)
		}
		for c := n.FirstChild; c != nil; c = c.NextSibling {
			rec(c)
		}
	}
	rec(n)
	return b.String()
}

// selfContained fails when the page has a script, or any attribute that
// would load something (src, href other than a data: URI, an @import or
// url() in a style other than data:).
func selfContained(t *testing.T, doc *html.Node) {
	t.Helper()
	walk(doc, func(n *html.Node) {
		if n.Data == "script" || n.Data == "iframe" || n.Data == "link" || n.Data == "object" || n.Data == "embed" {
			t.Errorf("page has a <%s> element", n.Data)
		}
		for _, a := range n.Attr {
			k := strings.ToLower(a.Key)
			switch {
			case k == "src" || k == "href" || strings.HasSuffix(k, ":href") || k == "action":
				if !strings.HasPrefix(a.Val, "data:") && !strings.HasPrefix(a.Val, "#") {
					t.Errorf("<%s %s=%.60q> would load a resource", n.Data, a.Key, a.Val)
				}
			case strings.HasPrefix(k, "on"):
				t.Errorf("<%s> has an event handler %s", n.Data, a.Key)
			case k == "style" && (strings.Contains(a.Val, "url(") || strings.Contains(a.Val, "@import")):
				t.Errorf("<%s> style loads a resource: %.80q", n.Data, a.Val)
			}
		}
		if n.Data == "style" && (strings.Contains(text(n), "url(") || strings.Contains(text(n), "@import")) {
			t.Error("the style sheet loads a resource")
		}
	})
}

// sectionOrder returns the ids of the top-level sections in page order.
func sectionOrder(doc *html.Node) []string {
	var ids []string
	walk(doc, func(n *html.Node) {
		if n.Data == "section" {
			for _, a := range n.Attr {
				if a.Key == "id" {
					ids = append(ids, a.Val)
				}
			}
		}
	})
	return ids
}

func TestReportFromResultFiles(t *testing.T) {
	cases := []struct {
		file      string
		kind      string
		plots     int      // inline SVG plots expected
		sections  []string // in this order, after the verdict
		mentions  []string // text the page must contain
		scenario  bool     // the result carries its scenario
		engineTag bool     // the result carries the engine version
	}{
		{"run.json", "run", 3, []string{"verdict", "figures", "plots", "users", "reproduce", "scenario"},
			[]string{"near-far stress", "outage (%)", "SIR error 99th pct (dB)", "per distance bin", "convergence time (s)"}, true, true},
		{"sweep.json", "sweep", 1, []string{"verdict", "points", "plots", "reproduce", "scenario"},
			[]string{"Lowest outage at", "inner_loop.step_db", "groups[1].speeds[0].speed_kmh"}, true, true},
		{"sweep_heat.json", "sweep-heatmap", 1, []string{"verdict", "points", "plots", "reproduce", "scenario"},
			[]string{"Lowest outage at", "inner_loop.update_rate_hz", "outage (%) over step × update rate"}, false, true},
		{"tune.json", "tune", 1, []string{"verdict", "conditions", "candidates", "plots", "reproduce", "scenario"},
			[]string{"Use step_db=", "Runner-up", "paired replications", "candidate runs", "3 km/h", "60 km/h"}, false, false},
		{"layout_run1.json", "run-layout", 1, []string{"verdict", "figures", "layout", "plots", "reproduce", "scenario"},
			[]string{"f (other_to_own in the JSON and CSV)", "mean served users", "(no interval)"}, true, true},
		{"cap.json", "capacity", 0, []string{"verdict", "evaluated", "reproduce", "scenario"},
			[]string{"Capacity of", "Pole capacity (Gilhousen et al. 1991)", "interference equation"}, false, false},
	}
	for _, tc := range cases {
		t.Run(tc.kind, func(t *testing.T) {
			in := readFixture(t, tc.file)
			if k, err := in.kind(); err != nil || !strings.HasPrefix(tc.kind, k) {
				t.Fatalf("kind %q (%v), want %q", k, err, tc.kind)
			}
			page := render(t, in)
			if *outDir != "" {
				if err := os.WriteFile(filepath.Join(*outDir, tc.kind+".html"), []byte(page), 0o644); err != nil {
					t.Fatal(err)
				}
			}
			doc, err := html.Parse(strings.NewReader(page))
			if err != nil {
				t.Fatalf("page does not parse: %v", err)
			}
			selfContained(t, doc)
			got := sectionOrder(doc)
			if strings.Join(got, ",") != strings.Join(tc.sections, ",") {
				t.Errorf("sections %v, want %v (verdict first)", got, tc.sections)
			}
			svgs := 0
			walk(doc, func(n *html.Node) {
				if n.Data == "svg" {
					svgs++
				}
			})
			if svgs != tc.plots {
				t.Errorf("%d inline SVG plots, want %d", svgs, tc.plots)
			}
			body := text(doc)
			for _, m := range append(tc.mentions, "Caution.", "regulatory limits on transmit power and exposure") {
				if !strings.Contains(body, m) {
					t.Errorf("page does not say %q", m)
				}
			}
			// One caution per page: the box under the verdict (not again in
			// the footer, nor among the engine's notes).
			if n := strings.Count(body, "do not replace the operator"); n != 1 {
				t.Errorf("caution shown %d times, want once", n)
			}
			if strings.Contains(body, "engine version") && tc.engineTag && strings.Contains(body, "not recorded in this result") {
				t.Errorf("engine version not shown although the result carries it")
			}
		})
	}
}

// TestRunFiguresMatchReport checks that every aggregate figure of a run is
// printed with its value and interval, as the message has them.
func TestRunFiguresMatchReport(t *testing.T) {
	in := readFixture(t, "run.json")
	page := render(t, in)
	agg := in.Run.GetAggregate()
	for _, fd := range clirender.Figures() {
		e := fd.Get(agg)
		// One column "95 % interval" with "[lo, hi]", as the CLI's run table.
		row := fmt.Sprintf("<td>%s</td><td class=\"n\">%s</td><td>[%s,\u00a0%s]</td>",
			htmlEsc(fd.Label), num(fd.Scale*e.GetValue(), fd.Dec), num(fd.Scale*e.GetCiLow(), fd.Dec), num(fd.Scale*e.GetCiHigh(), fd.Dec))
		if !strings.Contains(page, row) {
			t.Errorf("figure row missing or wrong: %s", row)
		}
		if !(e.GetCiLow() <= e.GetValue() && e.GetValue() <= e.GetCiHigh()) {
			t.Errorf("%s: value %g outside its interval [%g, %g]", fd.Label, e.GetValue(), e.GetCiLow(), e.GetCiHigh())
		}
	}
	if !strings.Contains(page, fmt.Sprintf("<td>%d</td>", in.Run.GetSeed())) {
		t.Errorf("seed %d not in the reproduction table", in.Run.GetSeed())
	}
	if !strings.Contains(page, in.Run.GetEngineVersion()) {
		t.Errorf("engine version %q not shown", in.Run.GetEngineVersion())
	}
	// The per-bin and per-user tables have the CLI's columns: the cell's
	// noise rise (one value for every row) is not repeated in them.
	rise := htmlEsc(clirender.MustFigure("noise_rise_mean_db").Head())
	for _, caption := range []string{"Per distance bin", "Per user"} {
		i := strings.Index(page, caption)
		if i < 0 {
			t.Fatalf("no %q table", caption)
		}
		j := strings.Index(page[i:], "</table>")
		if strings.Contains(page[i:i+j], "<th>"+rise) || strings.Contains(page[i:i+j], ">"+rise+"<") {
			t.Errorf("%s table repeats the cell's %q column", caption, rise)
		}
	}
}

func htmlEsc(s string) string {
	// html/template's escaping of text.
	return strings.NewReplacer("&", "&amp;", "<", "&lt;", ">", "&gt;", `"`, "&#34;", "'", "&#39;").Replace(s)
}

// TestScenarioJSONRoundTrips reads the scenario back from the page's
// <pre> block and compares it with the report's normalised scenario.
func TestScenarioJSONRoundTrips(t *testing.T) {
	for _, file := range []string{"run.json", "sweep.json"} {
		t.Run(file, func(t *testing.T) {
			in := readFixture(t, file)
			if in.Sweep != nil {
				// A sweep's JSON does not carry the base: supply one.
				in.Sweep.Base = readRunScenario(t)
			}
			doc, err := html.Parse(strings.NewReader(render(t, in)))
			if err != nil {
				t.Fatal(err)
			}
			var pre string
			walk(doc, func(n *html.Node) {
				if n.Data == "pre" {
					pre = text(n)
				}
			})
			got := &pb.Scenario{}
			if err := protojson.Unmarshal([]byte(pre), got); err != nil {
				t.Fatalf("the JSON on the page is not a Scenario: %v", err)
			}
			want := readRunScenario(t)
			if !proto.Equal(got, want) {
				t.Errorf("scenario on the page differs from the report's")
			}
		})
	}
}

func readRunScenario(t *testing.T) *pb.Scenario {
	return readFixture(t, "run.json").Run.GetNormalisedScenario()
}

// TestTuneScenarioFromRequest: a tune result with its request shows the
// request's base scenario and axes.
func TestTuneScenarioFromRequest(t *testing.T) {
	in := readFixture(t, "tune.json")
	base := &pb.Scenario{Name: "cell <b>with</b> & markup", Run: &pb.RunSettings{Seed: 77}}
	in.TuneRequest = &pb.TuneRequest{Base: base, Axes: []*pb.SweepAxis{{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}}}}
	page := render(t, in)
	doc, err := html.Parse(strings.NewReader(page))
	if err != nil {
		t.Fatal(err)
	}
	selfContained(t, doc)
	walk(doc, func(n *html.Node) {
		if n.Data == "b" {
			t.Error("scenario name was inserted as markup")
		}
	})
	body := text(doc)
	for _, m := range []string{"cell <b>with</b> & markup", "inner_loop.step_db=0.5,1,2", "run.seed"} {
		if !strings.Contains(body, m) {
			t.Errorf("page does not say %q", m)
		}
	}
}

func TestInputErrors(t *testing.T) {
	cases := []struct {
		name string
		in   Input
		want string
	}{
		{"nothing", Input{}, "no result"},
		{"two", Input{Run: &pb.RunReport{}, Tune: &pb.Recommendation{}}, "one result at a time"},
		{"empty sweep", Input{Sweep: &Sweep{}}, "no points"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			err := Write(&bytes.Buffer{}, tc.in)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
	bad := []struct{ name, json, want string }{
		{"not JSON", `[1, 2`, "not a JSON object"},
		{"not ours", `{"hello": 1}`, "not a run, sweep, tune or capacity result"},
		{"unknown field", `{"aggregate": {}, "colour": "red"}`, "colour"},
	}
	for _, tc := range bad {
		t.Run(tc.name, func(t *testing.T) {
			_, err := ReadResult(strings.NewReader(tc.json))
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Fatalf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
}

// TestRunVerdictBLER: with the outer loop on, a BLER whose difference to the
// target excludes 0 turns the verdict to a warning; within its interval, or
// with the outer loop off, it does not.
func TestRunVerdictBLER(t *testing.T) {
	cases := []struct {
		name          string
		enabled       bool
		lo, val, hi   float64
		class, saying string
	}{
		{"held", true, -0.002, 0.001, 0.004, "ok", "against a target of 10.00 %."},
		{"above target", true, 0.01, 0.02, 0.03, "warn", "did not hold it"},
		{"below target", true, -0.06, -0.05, -0.04, "warn", "did not hold it"},
		{"outer loop off", false, -0.06, -0.05, -0.04, "ok", "outer loop off"},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			rep := &pb.RunReport{
				Aggregate: &pb.Figures{
					Users:             2,
					OutageProbability: &pb.Estimate{Value: 0.01, CiLow: 0.005, CiHigh: 0.02},
					AchievedBler:      &pb.Estimate{Value: 0.1 + tc.val, CiLow: 0.1 + tc.lo, CiHigh: 0.1 + tc.hi},
					BlerTargetError:   &pb.Estimate{Value: tc.val, CiLow: tc.lo, CiHigh: tc.hi},
				},
				NormalisedScenario: &pb.Scenario{Name: "two users", OuterLoop: &pb.OuterLoop{Enabled: tc.enabled, BlerTarget: 0.1}},
				Seed:               3,
			}
			d, err := build(Input{Run: rep})
			if err != nil {
				t.Fatal(err)
			}
			if d.Verdict.Class != tc.class {
				t.Errorf("verdict class %q, want %q (%v)", d.Verdict.Class, tc.class, d.Verdict.Lines)
			}
			if !strings.Contains(strings.Join(d.Verdict.Lines, "\n"), tc.saying) {
				t.Errorf("verdict does not say %q: %v", tc.saying, d.Verdict.Lines)
			}
		})
	}
}

// TestNoIntervalVerdicts: figures whose interval is not available (NaN
// bounds: one replication of a layout too short for one) show their value
// with "(no interval)" in the verdicts, never "NaN" or empty brackets, and
// a sweep does not call two such points separated.
func TestNoIntervalVerdicts(t *testing.T) {
	nan := math.NaN()
	none := func(v float64) *pb.Estimate { return &pb.Estimate{Value: v, CiLow: nan, CiHigh: nan} }
	runRep := func(outage float64) *pb.RunReport {
		return &pb.RunReport{
			Aggregate: &pb.Figures{Users: 2, OutageProbability: none(outage), SirErrorStdDb: none(2), AchievedBler: none(0.1),
				BlerTargetError: none(0), TxPowerMeanDbm: none(-10), MaxPowerFraction: none(0), NoiseRiseMeanDb: none(1)},
			NormalisedScenario: &pb.Scenario{Name: "layout", OuterLoop: &pb.OuterLoop{Enabled: true, BlerTarget: 0.1}},
			Notes:              []string{"one replication: no intervals"},
			Seed:               3,
		}
	}
	d, err := build(Input{Run: runRep(0.05)})
	if err != nil {
		t.Fatal(err)
	}
	text := d.Verdict.Headline + "\n" + strings.Join(d.Verdict.Lines, "\n")
	for _, want := range []string{"Outage 5.00 % (no interval)", "SIR error std 2.00 dB (no interval)", "BLER 10.00 % (no interval)", "time at max power 0.00 %, noise rise 1.00 dB."} {
		if !strings.Contains(text, want) {
			t.Errorf("run verdict does not say %q:\n%s", want, text)
		}
	}
	for _, bad := range []string{"NaN", "[–", "did not hold"} {
		if strings.Contains(text, bad) {
			t.Errorf("run verdict says %q:\n%s", bad, text)
		}
	}
	sw := &Sweep{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{0, 6}}}, Points: []*pb.SweepPoint{
		{Index: 0, Coordinates: []float64{0}, Report: runRep(0.05)},
		{Index: 1, Coordinates: []float64{6}, Report: runRep(0.07)},
	}}
	d, err = build(Input{Sweep: sw})
	if err != nil {
		t.Fatal(err)
	}
	text = d.Verdict.Headline + "\n" + strings.Join(d.Verdict.Lines, "\n")
	if d.Verdict.Class != "warn" || !strings.Contains(text, "no interval for one of them") || strings.Contains(text, "do not overlap") || strings.Contains(text, "NaN") {
		t.Errorf("sweep verdict (class %q):\n%s", d.Verdict.Class, text)
	}
}

// TestLayoutSweepReport: a multi-cell sweep's point table leaves out the
// figures the multi-cell engine does not compute (percentiles), and its
// plot is f and outage against the axis, not an SIR error distribution
// drawn from percentiles that are all zero.
func TestLayoutSweepReport(t *testing.T) {
	est := func(v float64) *pb.Estimate { return &pb.Estimate{Value: v, CiLow: v * 0.9, CiHigh: v * 1.1} }
	rep := func(outage float64) *pb.RunReport {
		return &pb.RunReport{
			Aggregate: &pb.Figures{Users: 2, OutageProbability: est(outage), SirErrorStdDb: est(2), AchievedBler: est(0.1),
				TxPowerMeanDbm: est(-10), MaxPowerFraction: est(0.01), NoiseRiseMeanDb: est(1),
				TxPowerPercentilesDbm: &pb.Percentiles{P95: &pb.Estimate{}}},
			Layout:             &pb.LayoutReport{Overall: &pb.LayoutOverall{OtherToOwn: est(0.6), OutageProbability: est(outage)}},
			NormalisedScenario: &pb.Scenario{Name: "layout"},
			Seed:               3,
		}
	}
	sw := &Sweep{Axes: []*pb.SweepAxis{{Path: "layout.handover.window_db", Values: []float64{0, 6}}}, Points: []*pb.SweepPoint{
		{Index: 0, Coordinates: []float64{0}, Report: rep(0.05)},
		{Index: 1, Coordinates: []float64{6}, Report: rep(0.07)},
	}}
	d, err := build(Input{Sweep: sw})
	if err != nil {
		t.Fatal(err)
	}
	var head []string
	var captions []string
	for _, s := range d.Sections {
		for _, tb := range s.Tables {
			if s.ID == "points" {
				head = tb.Head
			}
		}
		for _, f := range s.Figures {
			captions = append(captions, f.Caption)
		}
	}
	if strings.Contains(strings.Join(head, "|"), "p95") || !strings.Contains(strings.Join(head, "|"), "outage") {
		t.Errorf("point table head %q", head)
	}
	if len(captions) != 1 || !strings.Contains(captions[0], "f (other-cell / own-cell interference) and outage") {
		t.Errorf("figures %q, want the layout plot", captions)
	}
}

package main

import (
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestMultiCellRunAndMap: the multi-cell example runs from the CLI, prints
// the layout figures (overall, by handover state, per cell) and draws the
// map; testdata/scenarios/harbour_town.json is the example's JSON form.
func TestMultiCellRunAndMap(t *testing.T) {
	dir := os.Getenv("FADELOOP_PLOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	j := ok(t, "example", "--multi-cell", "--format", "json")
	fromFile, err := client.LoadScenarioFile(filepath.Join(repoRoot, "testdata/scenarios/harbour_town.json"))
	if err != nil {
		t.Fatal(err)
	}
	fromExample, err := client.ParseScenario("example", []byte(j.stdout))
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(fromFile.Scenario, fromExample.Scenario) {
		t.Error("testdata/scenarios/harbour_town.json differs from fadeloop example --multi-cell --format json")
	}
	r := ok(t, "run", "testdata/scenarios/harbour_town.json", "--slots", "600", "--replications", "2", "--quiet",
		"--plot", "map="+filepath.Join(dir, "map.png"), "--plot", "map-power="+filepath.Join(dir, "map-power.svg"))
	for _, want := range []string{"fadeloop-multicell", "f (other_to_own in the JSON and CSV)", "soft-handover share (%)",
		"by handover state", "S6/2", "noise rise 95th pct (dB)", "do not replace the operator's radio planning"} {
		if !strings.Contains(r.stdout, want) {
			t.Errorf("run table lacks %q:\n%s", want, r.stdout)
		}
	}
	if n := strings.Count(r.stdout, "do not replace the operator"); n != 1 {
		t.Errorf("run table shows the caution %d times, want once", n)
	}
	// (The notes name convergence time among what is not computed; no
	// table row may show it.)
	if regexp.MustCompile(`(?m)^convergence time`).MatchString(r.stdout) {
		t.Error("the multi-cell table prints a figure the engine does not compute")
	}
	checkPNG(t, filepath.Join(dir, "map.png"))
	checkSVG(t, filepath.Join(dir, "map-power.svg"))
	// A bare --plot FILE on a layout draws the map (traces are single-cell).
	r = ok(t, "run", "testdata/scenarios/harbour_town.json", "--slots", "300", "--replications", "2", "--quiet",
		"--plot", filepath.Join(dir, "bare.png"))
	checkPNG(t, filepath.Join(dir, "bare.png"))
	// A map needs a layout.
	fl(t, "run", "testdata/scenarios/small.json", "--slots", "300", "--quiet", "--plot", "map="+filepath.Join(dir, "x.png")).want(t, 2)
}

// TestMultiCellRunReport: a multi-cell run writes its HTML report (it
// asked the engine for traces, which a layout refuses: exit 2 before) with
// the layout map and without the percentile rows the engine does not
// compute.
func TestMultiCellRunReport(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "run.html")
	ok(t, "run", "testdata/scenarios/harbour_town.json", "--slots", "600", "--replications", "1", "--quiet", "--report", path)
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	html := string(b)
	if !strings.Contains(html, "Users by outage") || !strings.Contains(html, "<svg") {
		t.Error("report has no layout map")
	}
	if strings.Contains(html, "SIR error 1st pct") || strings.Contains(html, "SIR error distribution per distance bin") {
		t.Error("report shows percentiles the multi-cell engine does not compute")
	}
}

// TestMultiCellSweepPlot: a sweep over the handover window and the step
// draws f and outage against the window.
func TestMultiCellSweepPlot(t *testing.T) {
	dir := t.TempDir()
	ok(t, "sweep", "testdata/scenarios/harbour_town.json", "--slots", "600", "--replications", "1", "--quiet",
		"--axis", "layout.handover.window_db=0,6", "--axis", "inner_loop.step_db=0.5,2",
		"--plot", "layout="+filepath.Join(dir, "layout.png"))
	checkPNG(t, filepath.Join(dir, "layout.png"))
	// Needs a layout.
	fl(t, "sweep", "testdata/scenarios/small.json", "--slots", "300", "--quiet",
		"--axis", "inner_loop.step_db=0.5,2", "--plot", "layout="+filepath.Join(dir, "x.png")).want(t, 2)
}

// TestMultiCellTuneF: a tune over the handover window on a layout sends
// each candidate's f (figures.other_to_own) and its condition table shows
// it in an f column with the note naming it.
func TestMultiCellTuneF(t *testing.T) {
	args := []string{"tune", "testdata/scenarios/harbour_town.json", "--slots", "600", "--quiet",
		"--axis", "layout.handover.window_db=0,6", "--min-reps", "2", "--max-reps", "2"}
	r := ok(t, args...)
	if !strings.Contains(r.stdout, render.TuneFNote) || !regexp.MustCompile(`noise rise \(dB\) +f +n +status`).MatchString(r.stdout) {
		t.Errorf("layout tune table has no f column or note:\n%s", r.stdout)
	}
	j := ok(t, append(args, "--format", "json")...)
	rec := &pb.Recommendation{}
	if err := protojson.Unmarshal([]byte(j.stdout), rec); err != nil {
		t.Fatal(err)
	}
	for _, cr := range rec.GetConditions()[0].GetCandidates() {
		if e := cr.GetFigures().GetOtherToOwn(); e == nil || e.GetN() != 2 || e.GetMean() <= 0 || e.GetLow() > e.GetMean() || e.GetHigh() < e.GetMean() {
			t.Errorf("candidate %d: other_to_own %v, want a positive f over 2 replications", cr.GetCandidate(), e)
		}
	}
}

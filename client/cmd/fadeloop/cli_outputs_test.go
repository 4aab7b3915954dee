package main

import (
	"context"
	"encoding/csv"
	"encoding/json"
	"fmt"
	"image/png"
	"log/slog"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"

	"github.com/fadeloop/fadeloop/client"
	"github.com/fadeloop/fadeloop/client/plots"
	"github.com/fadeloop/fadeloop/fading"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
	"github.com/fadeloop/fadeloop/service"
)

func checkPNG(t *testing.T, path string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	cfg, err := png.DecodeConfig(f)
	if err != nil {
		t.Fatalf("%s: not a PNG: %v", path, err)
	}
	if cfg.Width != plots.WidthPx || cfg.Height != plots.HeightPx {
		t.Errorf("%s is %d×%d, want %d×%d", path, cfg.Width, cfg.Height, plots.WidthPx, plots.HeightPx)
	}
}

func checkSVG(t *testing.T, path string) {
	t.Helper()
	w, h, err := plots.SVGSize(path)
	if err != nil {
		t.Fatal(err)
	}
	if w != 900 || h != 600 {
		t.Errorf("%s is %g×%g pt, want 900×600 (1200×800 px at 96 dpi)", path, w, h)
	}
}

func TestPlots(t *testing.T) {
	dir := os.Getenv("FADELOOP_PLOT_DIR") // set to keep the pictures
	if dir == "" {
		dir = t.TempDir()
	}
	p := func(n string) string { return filepath.Join(dir, n) }
	ok(t, "run", "testdata/scenarios/near_far_stress.yaml", "--slots", "3000", "--quiet",
		"--plot", p("traces.png"), "--plot", "distance="+p("distance.svg"), "--plot", "cdf="+p("cdf.png"),
		"--plot", "distance="+p("distance.png"))
	checkPNG(t, p("traces.png"))
	checkSVG(t, p("distance.svg"))
	checkPNG(t, p("cdf.png"))
	checkPNG(t, p("distance.png"))
	ok(t, "sweep", "testdata/scenarios/command_errors_delay.yaml", "--slots", "1500", "--quiet",
		"--axis", "inner_loop.step_db=0.5,1,2", "--axis", "groups[0].speeds[0].speed_kmh=3,60",
		"--plot", p("steps.png"), "--plot", "cdf="+p("sweep-cdf.svg"))
	checkPNG(t, p("steps.png"))
	checkSVG(t, p("sweep-cdf.svg"))
	ok(t, "sweep", "testdata/scenarios/command_errors_delay.yaml", "--slots", "1500", "--quiet",
		"--axis", "inner_loop.step_db=0.5,1,2", "--axis", "inner_loop.update_rate_hz=750,1500",
		"--plot", p("heatmap.png"), "--plot", "heatmap="+p("heatmap.svg"), "--objective", "outage")
	checkPNG(t, p("heatmap.png"))
	checkSVG(t, p("heatmap.svg"))
}

func TestSweepOutputs(t *testing.T) {
	f := "testdata/scenarios/indoor_outer_loop.yaml"
	base := []string{"sweep", f, "--slots", "1500", "--quiet", "--axis", "inner_loop.step_db=0.5:1.5:3", "--axis", "outer_loop.up_step_db=0.25,0.5"}
	r := ok(t, append(base, "--format", "csv")...)
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if len(rows) != 7 || rows[0][2] != "inner_loop.step_db" || rows[0][3] != "outer_loop.up_step_db" {
		t.Fatalf("sweep CSV: %d rows, header %v; want 6 points", len(rows)-1, rows[0])
	}
	for i, row := range rows[1:] {
		if row[0] != fmt.Sprint(i) {
			t.Errorf("row %d has index %s: not sorted by index", i, row[0])
		}
	}
	if rows[1][2] != "0.5" || rows[3][2] != "1" || rows[5][2] != "1.5" || rows[2][3] != "0.5" {
		t.Errorf("grid order is not row-major: %v", rows[1:])
	}
	j := ok(t, append(base, "--format", "json")...)
	var doc struct {
		Points  []json.RawMessage `json:"points"`
		Summary struct {
			GridPoints string `json:"grid_points"`
		} `json:"summary"`
	}
	if err := json.Unmarshal([]byte(j.stdout), &doc); err != nil || len(doc.Points) != 6 || doc.Summary.GridPoints != "6" {
		t.Errorf("sweep JSON: %v, %d points, summary %+v", err, len(doc.Points), doc.Summary)
	}
	tb := ok(t, append(base, "--points", "1,4")...)
	if !strings.Contains(tb.stdout, "2 of 6 grid points") {
		t.Errorf("--points 1,4 table:\n%s", tb.stdout)
	}
	// A grid file instead of flags.
	grid := filepath.Join(t.TempDir(), "grid.yaml")
	os.WriteFile(grid, []byte("axes:\n  - path: inner_loop.step_db\n    values: [0.5, 2]\nseed_mode: SEED_MODE_PER_POINT\n"), 0o644)
	g := ok(t, "sweep", f, "--slots", "1500", "--quiet", "--grid", grid, "--format", "csv")
	if n := strings.Count(g.stdout, "\n"); n != 3 {
		t.Errorf("grid file sweep: %d lines, want header + 2\n%s", n, g.stdout)
	}
}

func TestTraceAndCheck(t *testing.T) {
	r := ok(t, "trace", "--profile", "EPA", "--samples", "200", "--links", "2", "--format", "csv", "--quiet")
	rows, err := csv.NewReader(strings.NewReader(r.stdout)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	epa, err := fading.BuiltinProfile("EPA")
	if err != nil {
		t.Fatal(err)
	}
	if want := 1 + 2*200*len(epa.Taps); len(rows) != want {
		t.Errorf("trace CSV has %d rows, want %d", len(rows), want)
	}
	bin := filepath.Join(t.TempDir(), "g.f32")
	ok(t, "trace", "--speed-kmh", "120", "--samples", "1000", "--links", "3", "--format", "bin", "--out", bin)
	if st, err := os.Stat(bin); err != nil || st.Size() != 8*1000*3 {
		t.Errorf("binary trace: %v, size %d, want %d", err, st.Size(), 8*1000*3)
	}
	tr := ok(t, "trace", "--samples", "3000", "--profile", "VEHA")
	if !strings.Contains(tr.stdout, "mean power (dB)") {
		t.Errorf("trace summary:\n%s", tr.stdout)
	}
	c := fl(t, "check", "--speed-kmh", "30", "--profile", "FLAT", "--links", "32", "--doppler-periods", "50")
	if c.code != exitOK && c.code != exitFailure {
		t.Fatalf("check: exit %d\n%s", c.code, c.stderr)
	}
	if !strings.Contains(c.stdout, "theory") || !strings.Contains(c.stdout, "pass") {
		t.Errorf("check table:\n%s", c.stdout)
	}
	cj := fl(t, "check", "--format", "json", "--doppler-hz", "40", "--links", "16", "--doppler-periods", "40")
	var resp struct {
		Lines []struct{ Name string } `json:"lines"`
	}
	if err := json.Unmarshal([]byte(cj.stdout), &resp); err != nil || len(resp.Lines) == 0 {
		t.Errorf("check json: %v\n%s", err, cj.stdout)
	}
	if r := fl(t, "check", "--doppler-hz", "900", "--rate-hz", "1500"); r.code != exitBadInput {
		t.Errorf("Doppler above half the rate: exit %d, want 2\n%s", r.code, r.stderr)
	}
}

func TestBench(t *testing.T) {
	r := ok(t, "bench", "--slots", "3000", "--repeat", "1", "--format", "json", "--quiet")
	var b struct {
		Best benchRun `json:"best"`
	}
	if err := json.Unmarshal([]byte(r.stdout), &b); err != nil {
		t.Fatal(err)
	}
	if b.Best.Users != 64 || !(b.Best.UserSlotsPerS > 0) || b.Best.PathSamplesPerS != 3*b.Best.UserSlotsPerS {
		t.Errorf("bench: %+v; want 64 users and path-samples/s = 3 × user-slots/s", b.Best)
	}
	tb := ok(t, "bench", "--slots", "1500", "--repeat", "1")
	if !strings.Contains(tb.stdout, "user-slots/s") || !strings.Contains(tb.stdout, "path-samples/s") {
		t.Errorf("bench table:\n%s", tb.stdout)
	}
}

// TestCanonicalCopy: the bench's built-in canonical scenario is the one in
// testdata.
func TestCanonicalCopy(t *testing.T) {
	want, err := client.LoadScenarioFile(filepath.Join(repoRoot, "testdata/scenarios/canonical.json"))
	if err != nil {
		t.Fatal(err)
	}
	got, err := client.ParseScenario("canonical.json", canonicalJSON)
	if err != nil {
		t.Fatal(err)
	}
	if !proto.Equal(want.Scenario, got.Scenario) {
		t.Error("client/cmd/fadeloop/canonical.json differs from testdata/scenarios/canonical.json; copy it over")
	}
}

// TestTapCounts: the bench's tap counts, taken from the run report's
// group_fingers, agree with package fading's built-in profiles.
func TestTapCounts(t *testing.T) {
	cl, err := client.Embedded(service.Config{Logger: slog.New(slog.DiscardHandler)}, client.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer cl.Close()
	taps := func(groups string) (float64, error) {
		t.Helper()
		g := strings.ReplaceAll(groups, "profile:", "max_distance_m: 1000, speeds: [{speed_kmh: 30}], profile:")
		sf, err := client.ParseScenario("x", []byte("receiver: {chip_rate_hz: 3.84e6, bit_rate_bps: 12.2e3}\ngroups: "+g+"\nrun: {slots: 200, warmup_slots: 0, batches: 20}"))
		if err != nil {
			t.Fatal(err)
		}
		rep, err := cl.Simulate(context.Background(), &pb.SimulateRequest{Scenario: sf.Scenario}, nil)
		if err != nil {
			t.Fatalf("%s: %v", groups, err)
		}
		return tapsPerUser(rep)
	}
	for _, name := range fading.BuiltinProfileNames() {
		p, err := fading.BuiltinProfile(name)
		if err != nil {
			t.Fatal(err)
		}
		got, err := taps("[{count: 2, profile: " + name + "}]")
		if err != nil || int(got) != len(p.Taps) {
			t.Errorf("%s: tapsPerUser %v (%v), fading has %d taps", name, got, err, len(p.Taps))
		}
	}
	// Mixed groups: (2·1 + 6·7)/8 paths per user (FLAT one tap, EPA seven,
	// TS 36.101 Annex B.2 (memory)).
	if got, err := taps("[{count: 2, profile: FLAT}, {count: 6, profile: epa}]"); err != nil || got != 44.0/8 {
		t.Errorf("mixed groups: %v (%v), want 5.5", got, err)
	}
	if _, err := tapsPerUser(&pb.RunReport{}); err == nil {
		t.Error("a report without group_fingers accepted")
	}
}

func TestHelpAndExample(t *testing.T) {
	top := ok(t, "--help")
	_ = top
	h := ok(t, "help")
	for _, c := range sortedCommands() {
		if !strings.Contains(h.stdout, "  "+c.name+" ") {
			t.Errorf("command list lacks %s:\n%s", c.name, h.stdout)
		}
		r := ok(t, c.name, "--help")
		if !strings.Contains(r.stdout, "Examples:") || !strings.Contains(r.stdout, "Usage: fadeloop "+c.name) ||
			!strings.Contains(r.stdout, "--server") {
			t.Errorf("%s --help lacks usage, examples or global flags:\n%s", c.name, r.stdout)
		}
	}
	ex := ok(t, "example")
	path := filepath.Join(t.TempDir(), "cell.yaml")
	os.WriteFile(path, []byte(ex.stdout), 0o644)
	sf, err := client.LoadScenarioFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(ex.stdout, "# ") {
		t.Error("example has no comments")
	}
	ok(t, "run", path, "--slots", "1500", "--quiet")
	exj := ok(t, "example", "--format", "json")
	sj, err := client.ParseScenario("x.json", []byte(exj.stdout))
	if err != nil || !proto.Equal(sj.Scenario, sf.Scenario) {
		t.Errorf("example --format json differs from the YAML (%v)", err)
	}
	v := ok(t, "version")
	if !strings.HasPrefix(v.stdout, "fadeloop ") {
		t.Errorf("version: %q", v.stdout)
	}
}

package plots

import (
	"bytes"
	"errors"
	"image/png"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"
)

// sampleFigures builds one figure of every kind from synthetic data (seeded
// PCG draws, nothing from the engine) so that the drawing code is exercised
// on its own.
func sampleFigures(t *testing.T) map[string]*Figure {
	t.Helper()
	r := rand.New(rand.NewPCG(1, 2))
	figs := map[string]*Figure{}

	var ds []ErrorDistribution
	for i, sd := range []float64{0.8, 1.4, 2.2} {
		s := make([]float64, 5000)
		for k := range s {
			s[k] = sd*r.NormFloat64() - 0.2*float64(i)
		}
		ds = append(ds, ErrorDistribution{Label: []string{"step 0.5 dB", "step 1 dB", "step 2 dB"}[i], SamplesDB: s})
	}
	ds = append(ds, ErrorDistribution{Label: "fixed power (quantiles)", Quantiles: []Quantile{
		{0.01, -14}, {0.05, -9}, {0.5, 0.5}, {0.95, 5}, {0.99, 6.5}}})
	f, err := SIRErrorCDF("SIR error distribution per candidate", ds)
	if err != nil {
		t.Fatal(err)
	}
	figs["cdf"] = f

	var ts []Trace
	for u := range 3 {
		n := 600
		tr := Trace{Label: []string{"user 0 (40 m)", "user 7 (600 m)", "user 12 (1900 m)"}[u]}
		p := 0.0
		for k := range n {
			tt := float64(k) / 1500 * 10
			tr.TimeS = append(tr.TimeS, tt)
			tgt := 6 + 0.5*math.Sin(tt)
			tr.TargetDB = append(tr.TargetDB, tgt)
			tr.SIRDB = append(tr.SIRDB, tgt+1.5*r.NormFloat64())
			p += 0.3 * r.NormFloat64()
			tr.TxPowerDBM = append(tr.TxPowerDBM, -20+12*float64(u)+p)
		}
		ts = append(ts, tr)
	}
	f, err = Traces("Traces: dense urban cell", ts)
	if err != nil {
		t.Fatal(err)
	}
	figs["traces"] = f

	steps := []float64{0.25, 0.5, 1, 2, 3}
	var ls []StepLine
	for i, v := range []float64{3, 30, 120} {
		l := StepLine{Label: []string{"3 km/h", "30 km/h", "120 km/h"}[i], StepDB: steps}
		for _, s := range steps {
			o := 2 + float64(i)*3 + 2*math.Abs(math.Log2(s/(0.5+float64(i)*0.5)))
			l.OutagePct = append(l.OutagePct, o)
			l.OutageLowPct = append(l.OutageLowPct, o-0.4)
			l.OutageHighPct = append(l.OutageHighPct, o+0.5)
			e := 0.6 + v/60 + 0.3*s
			l.ErrorStdDB = append(l.ErrorStdDB, e)
			l.ErrorStdLowDB = append(l.ErrorStdLowDB, e-0.05)
			l.ErrorStdHighDB = append(l.ErrorStdHighDB, e+0.05)
		}
		ls = append(ls, l)
	}
	f, err = StepSensitivity("Outage and SIR error std against step size", ls)
	if err != nil {
		t.Fatal(err)
	}
	figs["steps"] = f

	g := ObjectiveGrid{Objective: "SIR error std (dB)", StepDB: steps, UpdateRateHz: []float64{500, 1000, 1500},
		LowerIsBetter: true}
	for ri, rate := range g.UpdateRateHz {
		row := make([]float64, len(steps))
		for c, s := range steps {
			row[c] = 1 + math.Abs(math.Log2(s)) + 1500/rate*0.4
		}
		if ri == 0 {
			row[4] = math.NaN()
		}
		g.Value = append(g.Value, row)
	}
	f, err = HeatMap("Objective over step × update rate", g)
	if err != nil {
		t.Fatal(err)
	}
	figs["heat"] = f

	var pts []DistancePoint
	for i := range 24 {
		d := 30 * math.Pow(2000.0/30, float64(i)/23)
		m := math.Min(-40+35*math.Log10(d/30)+2*r.NormFloat64(), 24)
		grp := "near group"
		if i >= 12 {
			grp = "far group"
		}
		pts = append(pts, DistancePoint{Group: grp, DistanceM: d, TxMeanDBM: m, TxLowDBM: m - 5, TxHighDBM: math.Min(m+4, 24), HasPercent: true})
	}
	f, err = PowerVsDistance("Tx power against distance", pts, -50, 24, "5th–95th percentile")
	if err != nil {
		t.Fatal(err)
	}
	figs["distance"] = f
	return figs
}

// TestFiguresEncode draws every kind of figure to PNG and SVG and checks that
// the files decode and have the documented size (1200 × 800 px; SVG
// 900 × 600 pt, the same at 96 dpi). Set FADELOOP_PLOT_DIR to keep the files
// for looking at them.
func TestFiguresEncode(t *testing.T) {
	dir := os.Getenv("FADELOOP_PLOT_DIR")
	if dir == "" {
		dir = t.TempDir()
	}
	for name, f := range sampleFigures(t) {
		// Text rasterising is slow under the race detector: -short draws
		// two of the five kinds (the CLI tests draw all five, unraced).
		if testing.Short() && name != "heat" && name != "distance" {
			continue
		}
		t.Run(name, func(t *testing.T) {
			var b bytes.Buffer
			if err := f.Encode(&b, "png"); err != nil {
				t.Fatal(err)
			}
			cfg, err := png.DecodeConfig(bytes.NewReader(b.Bytes()))
			if err != nil {
				t.Fatalf("not a PNG: %v", err)
			}
			if cfg.Width != WidthPx || cfg.Height != HeightPx {
				t.Errorf("PNG is %d×%d, want %d×%d", cfg.Width, cfg.Height, WidthPx, HeightPx)
			}
			if err := os.WriteFile(filepath.Join(dir, name+".png"), b.Bytes(), 0o644); err != nil {
				t.Fatal(err)
			}
			svgPath := filepath.Join(dir, name+".svg")
			if err := f.Save(svgPath); err != nil {
				t.Fatal(err)
			}
			w, h, err := SVGSize(svgPath)
			if err != nil {
				t.Fatal(err)
			}
			if w != 900 || h != 600 {
				t.Errorf("SVG is %g×%g pt, want 900×600", w, h)
			}
		})
	}
}

func TestNoData(t *testing.T) {
	if _, err := SIRErrorCDF("x", nil); !errors.Is(err, ErrNoData) {
		t.Errorf("empty CDF: got %v, want ErrNoData", err)
	}
	if _, err := Traces("x", []Trace{{Label: "a"}}); !errors.Is(err, ErrNoData) {
		t.Errorf("empty traces: got %v", err)
	}
	if _, err := HeatMap("x", ObjectiveGrid{StepDB: []float64{1}, UpdateRateHz: []float64{1}, Value: [][]float64{{math.NaN()}}}); !errors.Is(err, ErrNoData) {
		t.Errorf("all-NaN heat map: got %v", err)
	}
	if _, err := PowerVsDistance("x", []DistancePoint{{DistanceM: -1}}, 0, 0, ""); !errors.Is(err, ErrNoData) {
		t.Errorf("no valid distance: got %v", err)
	}
	if _, err := FormatOf("a.pdf"); !errors.Is(err, ErrFormat) {
		t.Errorf("pdf: got %v, want ErrFormat", err)
	}
}

// TestWithheldIntervals: points whose interval is not available (NaN
// bounds, as a one-replication layout run too short for one reports) are
// drawn without an error bar instead of failing the figure (gonum's
// plotter rejects NaN error bars), in a line with some bars and in one
// with none.
func TestWithheldIntervals(t *testing.T) {
	nan := math.NaN()
	cases := []struct {
		name  string
		lines []LayoutLine
	}{
		{"some withheld", []LayoutLine{{Label: "a", X: []float64{0, 2}, F: []float64{0.5, 0.6}, FLow: []float64{0.4, nan}, FHigh: []float64{0.6, nan},
			OutagePct: []float64{5, 6}, OutageLow: []float64{4, nan}, OutageHigh: []float64{6, nan}}}},
		{"all withheld", []LayoutLine{{Label: "a", X: []float64{0, 2}, F: []float64{0.5, 0.6}, FLow: []float64{nan, nan}, FHigh: []float64{nan, nan},
			OutagePct: []float64{5, 6}, OutageLow: []float64{nan, nan}, OutageHigh: []float64{nan, nan}}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f, err := LayoutSweep("x", "window (dB)", c.lines)
			if err != nil {
				t.Fatal(err)
			}
			if err := f.Encode(io.Discard, "svg"); err != nil {
				t.Fatal(err)
			}
		})
	}
	var l StepLine
	l.Label = "120 km/h"
	l.Add(0.5, 0.05, nan, nan, 2, nan, nan)
	l.Add(1, 0.06, 0.05, 0.07, 2.5, 2.4, 2.6)
	f, err := StepSensitivity("x", []StepLine{l})
	if err != nil {
		t.Fatal(err)
	}
	if err := f.Encode(io.Discard, "svg"); err != nil {
		t.Fatal(err)
	}
}

package plots

import (
	"fmt"
	"image/color"
	"math"
	"slices"
	"sort"
	"strconv"

	"gonum.org/v1/gonum/stat/distuv"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
)

// SIRErrorCDF: distributions of the SIR error on normal probability paper.

// Quantile is one point of a distribution: the probability P (0..1) that the
// quantity is at most ValueDB (dB).
type Quantile struct {
	P       float64
	ValueDB float64
}

// ErrorDistribution is the SIR error (measured SIR minus SIR target, dB) of
// one candidate setting, either as raw samples (SamplesDB, drawn as the
// empirical CDF) or as quantile points (drawn as a piecewise-linear CDF
// through them). If both are given the samples win.
type ErrorDistribution struct {
	Label     string
	SamplesDB []float64
	Quantiles []Quantile
}

// SIRErrorCDF draws one cumulative distribution of the SIR error per
// candidate: x is the SIR error in dB, y the probability that the error is at
// most x, on a normal-probability (probit) scale from 0.5 % to 99.5 %, so
// that a Gaussian error is a straight line and the tails that make outage
// are spread out. Quantile inputs are drawn as marked points joined by
// lines. A steep, centred line is a loop that tracks; a shallow one is a
// loop that cannot follow the fading or adds its own step noise.
func SIRErrorCDF(title string, ds []ErrorDistribution) (*Figure, error) {
	p := newPanel(title, "SIR error = SIR − target (dB)", "P(SIR error ≤ x), normal probability scale")
	p.Y.Min, p.Y.Max = probitLow, probitHigh
	p.Y.Scale = probitScale{}
	p.Y.Tick.Marker = probitTicks{}
	p.Legend.Left = true
	n := 0
	for i, d := range ds {
		pts := cdfPoints(d)
		if len(pts) == 0 {
			continue
		}
		// The scale ends at 0.5 % and 99.5 %: the empirical CDF's steps
		// beyond are left out, quantiles pinned to the edge.
		if len(d.SamplesDB) > 0 {
			pts = slices.DeleteFunc(pts, func(q plotter.XY) bool { return q.Y < probitLow || q.Y > probitHigh })
			if len(pts) == 0 {
				continue
			}
		}
		for k := range pts {
			pts[k].Y = math.Min(math.Max(pts[k].Y, probitLow), probitHigh)
		}
		l, err := plotter.NewLine(pts)
		if err != nil {
			return nil, fmt.Errorf("candidate %q: %w", d.Label, err)
		}
		l.Color = seriesColor(i)
		l.Dashes = seriesDash(i)
		l.Width = vg.Points(2)
		p.Add(l)
		if len(d.SamplesDB) == 0 {
			sc, err := plotter.NewScatter(pts)
			if err != nil {
				return nil, err
			}
			sc.Color = seriesColor(i)
			sc.Shape = shapes[i%len(shapes)]
			sc.Radius = vg.Points(4)
			p.Add(sc)
			p.legend(d.Label, l, sc)
		} else {
			p.legend(d.Label, l)
		}
		n++
	}
	if n == 0 {
		return nil, ErrNoData
	}
	p.Add(vline{x: 0, c: color.Gray{Y: 90}})
	return &Figure{Title: title, panels: [][]*plot.Plot{{p.done()}}}, nil
}

// Range of the probability axis of SIRErrorCDF.
const (
	probitLow  = 0.005
	probitHigh = 0.995
)

// probitScale maps a probability to its standard normal quantile
// (normal probability paper).
type probitScale struct{}

func (probitScale) Normalize(lo, hi, x float64) float64 {
	q := func(v float64) float64 {
		return distuv.UnitNormal.Quantile(math.Min(math.Max(v, 1e-9), 1-1e-9))
	}
	return (q(x) - q(lo)) / (q(hi) - q(lo))
}

// probitTicks labels the usual probabilities of a normal probability plot.
type probitTicks struct{}

func (probitTicks) Ticks(lo, hi float64) []plot.Tick {
	var t []plot.Tick
	for _, v := range []float64{0.01, 0.02, 0.05, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8, 0.9, 0.95, 0.98, 0.99} {
		if v >= lo && v <= hi {
			t = append(t, plot.Tick{Value: v, Label: strconv.FormatFloat(v, 'g', 3, 64)})
		}
	}
	return t
}

func cdfPoints(d ErrorDistribution) plotter.XYs {
	if len(d.SamplesDB) > 0 {
		s := make([]float64, 0, len(d.SamplesDB))
		for _, v := range d.SamplesDB {
			if !math.IsNaN(v) && !math.IsInf(v, 0) {
				s = append(s, v)
			}
		}
		sort.Float64s(s)
		if len(s) == 0 {
			return nil
		}
		// Thin to at most ~2000 steps so the vector output stays small.
		stride := max(1, len(s)/2000)
		pts := make(plotter.XYs, 0, 2*len(s)/stride+2)
		prev := 0.0
		for i := 0; i < len(s); i += stride {
			f := float64(i+1) / float64(len(s))
			pts = append(pts, plotter.XY{X: s[i], Y: prev}, plotter.XY{X: s[i], Y: f})
			prev = f
		}
		pts = append(pts, plotter.XY{X: s[len(s)-1], Y: 1})
		return pts
	}
	q := slices.Clone(d.Quantiles)
	q = slices.DeleteFunc(q, func(x Quantile) bool {
		return math.IsNaN(x.P) || math.IsNaN(x.ValueDB) || math.IsInf(x.ValueDB, 0)
	})
	sort.Slice(q, func(i, j int) bool { return q[i].P < q[j].P })
	pts := make(plotter.XYs, len(q))
	for i, x := range q {
		pts[i] = plotter.XY{X: x.ValueDB, Y: x.P}
	}
	return pts
}

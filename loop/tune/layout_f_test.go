package tune

import (
	"math"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
)

// A multi-cell replication's sample carries f (the layout's other_to_own)
// and the candidate's figures its Student-t interval over replications; a
// single-cell one carries none (OtherToOwn nil, so no table shows an f of
// 0). f = 1.4, 1.5, 1.6: mean 1.5, s = 0.1, t_{2, 0.975} = 4.303 (Student-t
// table, memory), half-width 4.303 · 0.1/√3 = 0.2484; tolerance 1e-3 for
// the table's 4 digits.
func TestFiguresLayoutF(t *testing.T) {
	sc := &loop.Scenario{}
	var layout, single []Sample
	for _, f := range []float64{1.4, 1.5, 1.6} {
		rep := &loop.Report{SimulatedUserSlots: 100,
			Layout: &loop.LayoutReport{Overall: loop.LayoutOverall{OtherToOwn: loop.Estimate{Value: f}}}}
		s, err := sampleOf(sc, rep)
		if err != nil {
			t.Fatal(err)
		}
		if !s.Layout || s.OtherToOwn != f {
			t.Fatalf("layout sample: Layout %v, OtherToOwn %g, want true, %g", s.Layout, s.OtherToOwn, f)
		}
		layout = append(layout, s)
		s, err = sampleOf(sc, &loop.Report{SimulatedUserSlots: 100})
		if err != nil {
			t.Fatal(err)
		}
		single = append(single, s)
	}
	fg := figures(layout, 0.95)
	if fg.OtherToOwn == nil {
		t.Fatal("layout figures: no f")
	}
	e := *fg.OtherToOwn
	if e.N != 3 || math.Abs(e.Mean-1.5) > 1e-12 || math.Abs(e.HalfWidth()-0.2484) > 1e-3 {
		t.Errorf("f = %+v, want mean 1.5 ± 0.2484 over 3", e)
	}
	if fg := figures(single, 0.95); fg.OtherToOwn != nil || single[0].Layout {
		t.Errorf("single-cell figures carry f %+v", fg.OtherToOwn)
	}
}

package tune_test

import (
	"context"
	"fmt"

	"github.com/fadeloop/fadeloop/loop"
	"github.com/fadeloop/fadeloop/loop/tune"
)

// Which step and update rate for a 16-user cell at pedestrian and vehicular
// speeds, judged on the SIR error spread.
func ExampleTune() {
	base := loop.CanonicalScenario()
	base.Groups[0].Count = 16
	base.Run.Slots, base.Run.DurationS = 0, 5
	req := tune.Request{
		Base: base,
		Axes: []tune.Axis{
			{Path: "inner_loop.step_db", Values: []float64{0.5, 1, 2}},
			{Path: "inner_loop.update_rate_hz", First: 500, Last: 1500, Count: 3},
		},
		Conditions: []tune.Condition{
			{Name: "3 km/h", Weight: 2, Overrides: []tune.Override{{Path: "groups[0].speeds[0].speed_kmh", Value: 3}}},
			{Name: "EVA 60 km/h", Weight: 1, Overrides: []tune.Override{
				{Path: "groups[0].speeds[0].speed_kmh", Value: 60},
				{Path: "groups[0].profile", Text: "EVA"},
			}},
		},
		Objective: tune.Objective{Kind: tune.ObjectiveMinSIRErrorStd},
	}
	rec, err := tune.Tune(context.Background(), req, tune.Options{
		Progress: func(p tune.SearchProgress) { _ = p.CandidatesRemaining },
	})
	if err != nil {
		fmt.Println(err) // loop.Violations name every bad field
		return
	}
	// The outcome is rec.Overall.Verdict; the recommended setting is
	// Overall.Best (== Overall.Ordering[0]) whatever the verdict.
	switch rec.Overall.Verdict {
	case tune.VerdictConstraintsUnmet:
		fmt.Println("no setting meets the constraints; closest:", rec.Candidates[rec.Overall.Best].Label())
	default:
		fmt.Println(rec.Candidates[rec.Overall.Best].Label())
	}
	for _, line := range rec.Lines() { // headline, runner-up, warnings, tie rule, notice
		fmt.Println(line)
	}
}

// Every figure's display name and units come from one place.
func ExampleFigureLabel() {
	out := tune.FigureLabelOf(tune.FigureOutage)
	pw := tune.FigureLabelOf(tune.FigureTxPowerMean)
	fmt.Println(out.Value(0.0821), "|", out.Diff(0.032), "|", pw.Value(21.5), "|", pw.Diff(1.5))
	// Output: 8.21 % | 3.20 percentage points | 21.50 dBm | 1.50 dB
}

// The largest user count at 5 % outage and at most 6 dB of noise rise (the
// default ceiling), with the pole capacity beside it.
func ExampleCapacity() {
	base := loop.CanonicalScenario()
	base.Run.Slots = 6000
	res, err := tune.Capacity(context.Background(), tune.CapacityRequest{
		Base: base, Group: 0, OutageLimit: 0.05, MinCount: 16, MaxCount: 128,
	}, tune.Options{})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(res.Headline) // e.g. "Capacity: 55 users (...); limited by noise rise."
	fmt.Println(res.TotalUsers, res.LimitedBy, res.Pole, res.Reason)
}

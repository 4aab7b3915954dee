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
		Progress: func(p tune.Progress) { _ = p.CandidatesRemaining },
	})
	if err != nil {
		fmt.Println(err) // loop.Violations name every bad field
		return
	}
	fmt.Println(rec.Candidates[rec.Overall.Best].Label())
	fmt.Println(rec.Overall.Reason)
}

// The largest user count at 5 % outage, with the pole capacity beside it.
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
	fmt.Println(res.TotalUsers, res.Pole, res.Reason)
}

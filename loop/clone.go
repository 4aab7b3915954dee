package loop

import "slices"

// Clone returns a deep copy of sc: every slice (groups, and each group's
// distances, speeds and custom taps; inner-loop levels and thresholds; the
// link table) is copied, so changing the copy never changes sc. Nil slices
// stay nil and empty ones stay empty.
func (sc Scenario) Clone() Scenario {
	sc.Groups = slices.Clone(sc.Groups)
	for i := range sc.Groups {
		g := &sc.Groups[i]
		g.DistancesM = slices.Clone(g.DistancesM)
		g.Speeds = slices.Clone(g.Speeds)
		g.CustomTaps = slices.Clone(g.CustomTaps)
	}
	sc.InnerLoop.LevelsDB = slices.Clone(sc.InnerLoop.LevelsDB)
	sc.InnerLoop.ThresholdsDB = slices.Clone(sc.InnerLoop.ThresholdsDB)
	sc.Link.Table = slices.Clone(sc.Link.Table)
	return sc
}

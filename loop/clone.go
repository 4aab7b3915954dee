package loop

// Clone returns a deep copy of sc: every slice of the scenario (groups,
// their distances, speeds and custom taps, the inner loop's levels and
// thresholds, the link table) is copied, so changing the copy never
// changes sc. A nil slice stays nil.
func (sc Scenario) Clone() Scenario {
	out := sc
	if sc.Groups != nil {
		out.Groups = make([]UserGroup, len(sc.Groups))
		for i, g := range sc.Groups {
			g.DistancesM = cloneSlice(g.DistancesM)
			g.Speeds = cloneSlice(g.Speeds)
			g.CustomTaps = cloneSlice(g.CustomTaps)
			out.Groups[i] = g
		}
	}
	out.InnerLoop.LevelsDB = cloneSlice(sc.InnerLoop.LevelsDB)
	out.InnerLoop.ThresholdsDB = cloneSlice(sc.InnerLoop.ThresholdsDB)
	out.Link.Table = cloneSlice(sc.Link.Table)
	return out
}

func cloneSlice[T any](s []T) []T {
	if s == nil {
		return nil
	}
	return append(make([]T, 0, len(s)), s...)
}

package multicell

import "math"

// updateActiveSets re-evaluates every user's active set from the slow
// gains (events 1A/1B with hysteresis); the first evaluation uses the
// window alone. The leg slots that join are listed in rep.joiners for
// fillJoiners. Gains are compared in linear units against thresholds
// best·10^(−window/10), and only the cells that can qualify (within the
// drop window of the best) are ordered, not all C cells.
func (rp *rep) updateActiveSets(first bool) {
	h := rp.cfg.Handover
	C := rp.C
	if rp.cands == nil {
		rp.cands = make([]cand, 0, C)
		rp.keep = make([]int, 0, maxLegsPerUser)
	}
	addDB, dropDB := h.WindowDB-h.HysteresisDB/2, h.WindowDB+h.HysteresisDB/2
	if first {
		addDB, dropDB = h.WindowDB, h.WindowDB
	}
	addLin, dropLin := dbToLin(-addDB), dbToLin(-dropDB)
	loLin := math.Min(addLin, dropLin)
	rp.joiners = rp.joiners[:0]
	for u := range rp.users {
		us := &rp.users[u]
		before := us.legs // slots in use before: already filled for this block
		row := rp.slow[u*C : u*C+C]
		// The best cell: largest gain, the lowest index among equals.
		best, gBest := 0, row[0]
		for c, g := range row {
			if g > gBest {
				best, gBest = c, g
			}
		}
		// Candidates: the cells within the wider window of the best, in
		// descending gain (ties: lower index first).
		cands := rp.cands[:0]
		lo := gBest * loLin
		for c, g := range row {
			if g >= lo {
				cands = append(cands, cand{c, g})
				for i := len(cands) - 1; i > 0 && candBefore(cands[i], cands[i-1]); i-- {
					cands[i], cands[i-1] = cands[i-1], cands[i]
				}
			}
		}
		rp.cands = cands
		// Drop legs that fell out of the window (the best cell never drops).
		dropAt := gBest * dropLin
		for l, c := range us.legs {
			if c >= 0 && int(c) != best && row[c] < dropAt {
				us.legs[l] = -1
			}
		}
		// Keep at most MaxActive: the best cell, then the strongest others
		// within the add window or already in the set (and so inside the
		// drop window).
		keep := rp.keep[:0]
		addAt := gBest * addLin
		for _, cd := range cands {
			if len(keep) == h.MaxActive {
				break
			}
			if cd.c == best || cd.g >= addAt || us.legOf(cd.c) >= 0 {
				keep = append(keep, cd.c)
			}
		}
		for l, c := range us.legs {
			if c >= 0 {
				found := false
				for _, k := range keep {
					found = found || k == int(c)
				}
				if !found {
					us.legs[l] = -1
				}
			}
		}
		for _, c := range keep {
			if us.legOf(c) >= 0 {
				continue
			}
			for l := 0; l < h.MaxActive; l++ {
				if us.legs[l] < 0 {
					us.legs[l] = int32(c)
					rp.legAcc[u*h.MaxActive+l], rp.legN[u*h.MaxActive+l] = 0, 0
					if ch := us.legCh[l]; ch != nil && rp.blockN > 0 && before[l] < 0 {
						// A leg slot joining at a block start gets this block's
						// samples (fillJoiners; one in use before was filled
						// ahead).
						rp.joiners = append(rp.joiners, int32(u*maxLegsPerUser+l))
					}
					break
				}
			}
		}
		rp.refreshLegs(us, row)
		us.best = int32(best)
	}
}

// candBefore orders candidates by descending gain, then ascending cell.
func candBefore(x, y cand) bool {
	if x.g != y.g {
		return x.g > y.g
	}
	return x.c < y.c
}

// legOf is the leg slot carrying cell c, −1 if none.
func (us *user) legOf(c int) int {
	for l, lc := range us.legs {
		if int(lc) == c {
			return l
		}
	}
	return -1
}

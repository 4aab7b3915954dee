package loop

import (
	"math"
)

// histLayout is a fixed-bin log-linear histogram of positive values,
// indexed straight from the IEEE-754 bits: the key of x is its exponent and
// the top m bits of its mantissa (bits >> (52−m)), so each octave holds 2^m
// bins of equal linear width, and bin j covers exactly
// [2^e(1 + k/2^m), 2^e(1 + (k+1)/2^m)). A bin is at most 10·log10(1 + 2^−m)
// dB wide (0.0085 dB for m = 9, 0.017 dB for m = 8). Indexing costs a shift
// and a subtraction — no logarithm per sample — and the bin edges are exact,
// so percentiles are exact to within one bin and means computed from bin
// centres are exact to within half a bin. Index 0 counts values below the
// range (and zeros), index nb+1 values above it (and +Inf, NaN).
type histLayout struct {
	shift    uint
	base1    int       // key of the first in-range bin, minus 1
	nb       int       // in-range bins
	edgesDB  []float64 // nb+1 edges in dB of the in-range bins; edgesDB[j] is the lower edge of index j+1
	centerDB []float64 // nb+2 representative values in dB, under- and overflow at the range ends
	// Physical limits of the quantity in dB (±Inf when none): bin edges,
	// and so percentiles, are clamped to them (limitDB).
	minDB, maxDB float64
}

// newHistLayout covers [2^eMin, 2^eMax) with 2^m bins per octave.
func newHistLayout(eMin, eMax int, m uint) *histLayout {
	if eMax <= eMin {
		eMax = eMin + 1
	}
	l := &histLayout{shift: 52 - m, minDB: math.Inf(-1), maxDB: math.Inf(1)}
	base := (eMin + 1023) << m
	l.base1 = base - 1
	l.nb = (eMax - eMin) << m
	l.edgesDB = make([]float64, l.nb+1)
	for j := 0; j <= l.nb; j++ {
		x := math.Float64frombits(uint64(base+j) << l.shift)
		l.edgesDB[j] = 10 * math.Log10(x)
	}
	l.centerDB = make([]float64, l.nb+2)
	l.centerDB[0] = l.edgesDB[0]
	for j := 1; j <= l.nb; j++ {
		l.centerDB[j] = 0.5 * (l.edgesDB[j-1] + l.edgesDB[j])
	}
	l.centerDB[l.nb+1] = l.edgesDB[l.nb]
	return l
}

// layoutForDB covers at least [loDB, hiDB] dB.
func layoutForDB(loDB, hiDB float64, m uint) *histLayout {
	eMin := int(math.Floor(loDB/(10*math.Log10(2)))) - 1
	eMax := int(math.Ceil(hiDB/(10*math.Log10(2)))) + 1
	return newHistLayout(eMin, eMax, m)
}

// size is the length of a counts slice of this layout.
func (l *histLayout) size() int { return l.nb + 2 }

// index returns the bin of x in [0, nb+1].
func (l *histLayout) index(x float64) int {
	return binIndex(x, l.shift, l.base1, l.nb)
}

// binIndex is index with the layout's fields passed in (hot loops keep
// them in registers): branch-free, shift < 64.
func binIndex(x float64, shift uint, base1, nb int) int {
	k := int(math.Float64bits(x)>>(shift&63)) - base1
	return min(max(k, 0), nb+1)
}

// limitDB sets the physical limits of the quantity (e.g. a transmit
// power is never outside [min_power_dbm, max_power_dbm]): the bin holding
// a limit is cut there, so interpolated percentiles stay inside.
func (l *histLayout) limitDB(lo, hi float64) { l.minDB, l.maxDB = lo, hi }

// binEdges returns the dB edges of index j (under- and overflow collapse to
// the range ends), clamped to the physical limits.
func (l *histLayout) binEdges(j int) (lo, hi float64) {
	switch {
	case j <= 0:
		lo, hi = l.edgesDB[0], l.edgesDB[0]
	case j > l.nb:
		lo, hi = l.edgesDB[l.nb], l.edgesDB[l.nb]
	default:
		lo, hi = l.edgesDB[j-1], l.edgesDB[j]
	}
	return min(max(lo, l.minDB), l.maxDB), min(max(hi, l.minDB), l.maxDB)
}

// quantileSpec are the percentiles reported, as fractions.
var quantileSpec = [5]float64{0.01, 0.05, 0.50, 0.95, 0.99}

// histStats is the summary of one histogram: count, mean and standard
// deviation of the values in dB (from bin centres) and the percentiles of
// quantileSpec in dB (linear interpolation inside the bin).
type histStats struct {
	n    uint64
	mean float64
	std  float64
	q    [5]float64
}

// scanStats summarises counts over [lo, hi] (indices; counts outside are
// zero) with n = Σ counts. For each bin visited, visit(j, c) is called when
// c > 0 (it may merge and clear).
func scanStats[T uint32 | uint64](l *histLayout, c []T, lo, hi int, n uint64, qs []float64, out *histStats, visit func(j int, c T)) {
	*out = histStats{n: n}
	if n == 0 || lo > hi {
		return
	}
	var ranks [5]float64
	for i, q := range qs {
		ranks[i] = q * float64(n)
	}
	qi := 0
	var cum uint64
	var s1, s2 float64
	ref := 0.0 // shift for a numerically stable variance: the first used bin
	for j := lo; j <= hi; j++ {
		cj := c[j]
		if cj == 0 {
			continue
		}
		prev := cum
		cum += uint64(cj)
		if prev == 0 {
			ref = l.centerDB[j]
		}
		x := l.centerDB[j] - ref
		f := float64(cj)
		s1 += f * x
		s2 += f * x * x
		for qi < len(qs) && float64(cum) >= ranks[qi] {
			a, b := l.binEdges(j)
			frac := (ranks[qi] - float64(prev)) / f
			out.q[qi] = a + (b-a)*frac
			qi++
		}
		if visit != nil {
			visit(j, cj)
		}
	}
	for ; qi < len(qs); qi++ {
		_, b := l.binEdges(hi)
		out.q[qi] = b
	}
	fn := float64(n)
	m := s1 / fn
	out.mean = m + ref
	v := s2/fn - m*m
	if v < 0 {
		v = 0
	}
	out.std = math.Sqrt(v)
}

// usedRange returns the first and last non-zero index of c (lo > hi when
// every count is zero). It tests eight bins per step, so finding the few
// occupied bins of a wide histogram costs a fraction of a full scan.
func usedRange(c []uint32) (lo, hi int) {
	n := len(c)
	lo = 0
	for lo+8 <= n {
		s := c[lo : lo+8 : lo+8]
		if s[0]|s[1]|s[2]|s[3]|s[4]|s[5]|s[6]|s[7] != 0 {
			break
		}
		lo += 8
	}
	for lo < n && c[lo] == 0 {
		lo++
	}
	if lo == n {
		return 0, -1
	}
	hi = n - 1
	for hi-7 > lo {
		s := c[hi-7 : hi+1 : hi+1]
		if s[0]|s[1]|s[2]|s[3]|s[4]|s[5]|s[6]|s[7] != 0 {
			break
		}
		hi -= 8
	}
	for c[hi] == 0 {
		hi--
	}
	return lo, hi
}

package multicell

import "math"

// linToDB is 10·log10(x) for x > 0 without a logarithm call: x = 2^e·(1+m),
// 10·log10(x) = 10·log10(2)·(e + log2(1+m)), log2(1+m) linearly
// interpolated in a table of 2^linToDBBits + 1 points. The interpolation
// error is at most h²/(8 ln 2) in log2 with h = 2^−linToDBBits, i.e.
// 5.2e-7 dB (tested against math.Log10). Zero, negative, subnormal,
// infinite and NaN arguments go to math.Log10.
func linToDB(x float64) float64 {
	v := [1]float64{x}
	linToDBFloorTo(v[:], v[:], 0)
	return v[0]
}

// linToDBFloorTo sets dst[i] = linToDB(max(src[i], floor)) for every i
// (floor 0: no floor), in one loop without a call per element; dst may be
// src. It is linToDB's one implementation.
func linToDBFloorTo(dst, src []float64, floor float64) {
	dst = dst[:len(src)]
	// AVX2 where there is (the same bits), groups of four, up to the
	// first group the loop below must take; then the loop from there.
	for useAVX2 && len(src) >= 4 {
		n := linToDBFast(dst, src, floor)
		dst, src = dst[n:], src[n:]
		if len(src) >= 4 {
			linToDBFloorToGo(dst[:4], src[:4], floor)
			dst, src = dst[4:], src[4:]
		}
	}
	linToDBFloorToGo(dst, src, floor)
}

// linToDBFloorToGo is linToDBFloorTo in Go: the AVX2 loop's reference and
// the loop for values it does not take.
func linToDBFloorToGo(dst, src []float64, floor float64) {
	dst = dst[:len(src)]
	const fracBits = 52 - linToDBBits
	for i, x := range src {
		if floor > 0 {
			x = max(x, floor) // the builtin: no branch, the same value for these finite x
		}
		bits := math.Float64bits(x)
		exp := int(bits>>52) & 0x7ff
		if exp == 0 || exp == 0x7ff || bits>>63 != 0 {
			dst[i] = 10 * math.Log10(x)
			continue
		}
		m := bits & (1<<52 - 1)
		j := m >> fracBits
		f := float64(m&(1<<fracBits-1)) * (1.0 / (1 << fracBits))
		lo, hi := log2Table[j], log2Table[j+1]
		dst[i] = (float64(exp-1023) + lo + f*(hi-lo)) * db10Log2
	}
}

// linToDBBits is the table resolution of linToDB (mantissa bits).
const linToDBBits = 10

// db10Log2 is 10·log10(2).
const db10Log2 = 3.0102999566398119521

// log2Table[i] = log2(1 + i/2^linToDBBits), i = 0 … 2^linToDBBits.
var log2Table = func() (t [1<<linToDBBits + 1]float64) {
	for i := range t {
		t[i] = math.Log2(1 + float64(i)/(1<<linToDBBits))
	}
	return t
}()

// linFromDB is 10^(x/10) without an exponential call: 10^(x/10) = 2^y,
// y = x·log2(10)/10 = i + f (i integer, f in [0, 1)), 2^f linearly
// interpolated in a table of 2^linToDBBits + 1 points. The relative error
// is at most (h·ln 2)²/8 with h = 2^−linToDBBits, i.e. 5.8e-8 (2.5e-7 dB;
// tested against math.Pow). Beyond ±3000 dB, and for NaN, it is
// dbToLin's math.Exp.
//
// i and f come from y + 1024 (positive in range) by truncation, without a
// floor call; the addition rounds y to 2^−42, a relative error below
// 2e-13 on top of the table's.
func linFromDB(x float64) float64 {
	v := [1]float64{x}
	linFromDBInPlace(v[:])
	return v[0]
}

// linFromDBInPlace replaces every x[i] by linFromDB(x[i]), in one loop
// without a call per element. It is linFromDB's one implementation.
func linFromDBInPlace(x []float64) {
	for useAVX2 && len(x) >= 4 {
		x = x[linFromDBFast(x):]
		if len(x) >= 4 {
			linFromDBInPlaceGo(x[:4])
			x = x[4:]
		}
	}
	linFromDBInPlaceGo(x)
}

// linFromDBInPlaceGo is linFromDBInPlace in Go: the AVX2 loop's reference
// and the loop for values it does not take.
func linFromDBInPlaceGo(x []float64) {
	for i, v := range x {
		if !(v > -3000 && v < 3000) {
			x[i] = dbToLin(v)
			continue
		}
		yp := v*log2of10over10 + 1024
		e := int64(yp)
		f := (yp - float64(e)) * (1 << linToDBBits)
		j := int(f)
		lo, hi := exp2Table[j], exp2Table[j+1]
		x[i] = (lo + (f-float64(j))*(hi-lo)) * math.Float64frombits(uint64(e-1024+1023)<<52)
	}
}

// log2of10over10 is log2(10)/10.
const log2of10over10 = 0.33219280948873623479

// exp2Table[i] = 2^(i/2^linToDBBits), i = 0 … 2^linToDBBits.
var exp2Table = func() (t [1<<linToDBBits + 1]float64) {
	for i := range t {
		t[i] = math.Exp2(float64(i) / (1 << linToDBBits))
	}
	return t
}()

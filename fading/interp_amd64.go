//go:build amd64 && !purego

package fading

import "golang.org/x/sys/cpu"

// interpTapPowerAVX is interpTapPower in AVX assembly (interp_amd64.s), the
// same operations in the same order, so the same bits. The caller checks
// the index ranges (interpPowerFast).
//
//go:noescape
func interpTapPowerAVX(dst []float64, first bool, re, im []float64, idx, wrow []int32, wts *float64)

// interpPower3AVX is interpPower3 in AVX assembly for three taps whose
// rows lie stride elements apart in re and im (tap t at re[t*stride:]):
// the same operations in the same order, so the same bits.
//
//go:noescape
func interpPower3AVXAsm(dst []float64, first bool, re, im *float64, stride int, idx, wrow []int32, wts *float64)

// interpPower3AVX runs interpPower3AVXAsm on three tap rows of length
// stride in re and im (len 3·stride); the plan was checked by
// interpIndexOK against stride.
func interpPower3AVX(dst []float64, first bool, re, im []float64, stride int, idx, wrow []int32) {
	if len(re) != 3*stride || len(im) != 3*stride || len(idx) < len(dst) || len(wrow) < len(dst) {
		panic("fading: interpPower3AVX: bad buffer sizes")
	}
	interpPower3AVXAsm(dst, first, &re[0], &im[0], stride*8, idx, wrow, &interpTable[0])
}

// useAVX selects the assembly interpolator (tests switch it off to compare):
// the CPU and the OS support AVX (golang.org/x/sys/cpu, the module's one
// CPU-feature check).
var useAVX = cpu.X86.HasAVX

// interpPowerAVX runs interpTapPowerAVX when the CPU has AVX and reports
// whether it did.
func interpPowerAVX(dst []float64, first bool, re, im []float64, idx, wrow []int32) bool {
	if !useAVX {
		return false
	}
	interpTapPowerAVX(dst, first, re, im, idx, wrow, &interpTable[0])
	return true
}

// interpPower2AVXAsm is interpTapPowerAVX (first) for two one-tap
// channels sharing one plan (interp_amd64.s), the same bits for each.
//
//go:noescape
func interpPower2AVXAsm(dstA, dstB []float64, reA, imA, reB, imB *float64, idx, wrow *int32, wts *float64)

// interpPower2AVX runs interpPower2AVXAsm when the CPU has AVX and reports
// whether it did; the plan was checked by interpIndexOK against both
// buffers (the same length).
func interpPower2AVX(dstA, dstB, reA, imA, reB, imB []float64, idx, wrow []int32) bool {
	n := len(dstA)
	if !useAVX || n == 0 || len(dstB) != n || len(idx) < n || len(wrow) < n || len(reA) != len(reB) || len(imA) != len(reA) || len(imB) != len(reA) {
		return false
	}
	interpPower2AVXAsm(dstA, dstB, &reA[0], &imA[0], &reB[0], &imB[0], &idx[0], &wrow[0], &interpTable[0])
	return true
}

// osc16AVX runs sixteen oscillators of osc4 (four calls' worth) in AVX
// assembly: the same operations in the same order, so the same bits.
//
//go:noescape
func osc16AVX(dst []float64, first bool, c, a, b *float64)

// osc16 runs osc16AVX on c[:16], a[:16], b[:16] when the CPU has AVX and
// len(dst) is even, and reports whether it did.
func osc16(dst []float64, first bool, c, a, b []float64) bool {
	if !useAVX || len(dst)%2 != 0 || len(c) < 16 || len(a) < 16 || len(b) < 16 {
		return false
	}
	osc16AVX(dst, first, &c[0], &a[0], &b[0])
	return true
}

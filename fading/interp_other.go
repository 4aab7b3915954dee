//go:build !amd64 || purego

package fading

// useAVX is false off amd64 and with the purego build tag: the Go
// interpolator runs.
var useAVX = false

// interpPowerAVX reports false: no assembly interpolator off amd64.
func interpPowerAVX(dst []float64, first bool, re, im []float64, idx, wrow []int32) bool {
	return false
}

// interpPower2AVX reports false: no assembly interpolator off amd64.
func interpPower2AVX(dstA, dstB, reA, imA, reB, imB []float64, idx, wrow []int32) bool { return false }

// osc16 reports false: no assembly oscillators off amd64.
func osc16(dst []float64, first bool, c, a, b []float64) bool { return false }

// interpPower3AVX is never called off amd64 (useAVX is false).
func interpPower3AVX(dst []float64, first bool, re, im []float64, stride int, idx, wrow []int32) {
	panic("fading: no assembly interpolator off amd64")
}

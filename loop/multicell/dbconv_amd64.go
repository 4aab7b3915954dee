//go:build amd64 && !purego

package multicell

import "golang.org/x/sys/cpu"

// linFromDBAVX2 and linToDBAVX2 are linFromDBInPlace and linToDBFloorTo
// on groups of four in AVX2 (dbconv_amd64.s), the same bits; each returns
// how many leading values it converted, stopping at a group the Go loop
// must take (values out of range, not positive or not normal).
//
//go:noescape
func linFromDBAVX2(x []float64, table *float64) int

//go:noescape
func linToDBAVX2(dst, src []float64, floor float64, table *float64) int

// useAVX2 selects the AVX2 conversions (tests switch it off to compare).
var useAVX2 = cpu.X86.HasAVX2

func linFromDBFast(x []float64) int {
	if !useAVX2 || len(x) < 4 {
		return 0
	}
	return linFromDBAVX2(x, &exp2Table[0])
}

func linToDBFast(dst, src []float64, floor float64) int {
	if !useAVX2 || len(src) < 4 {
		return 0
	}
	_ = dst[len(src)-1]
	return linToDBAVX2(dst, src, floor, &log2Table[0])
}

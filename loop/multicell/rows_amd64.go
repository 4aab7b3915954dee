//go:build amd64 && !purego

package multicell

import (
	"golang.org/x/sys/cpu"
	"gonum.org/v1/gonum/floats"
)

// addScaledAVX is gonum's floats.AddScaled in AVX assembly (rows_amd64.s):
// a multiplication and an addition per element, each rounded, as gonum's
// SSE2 kernel does, so the same bits. row has len(s) elements
// at least (addScaled checks).
//
//go:noescape
func addScaledAVX(s []float64, d float64, row *float64)

// useAVX selects the assembly row update (tests switch it off to compare).
var useAVX = cpu.X86.HasAVX

// addScaled adds d·row to s element by element (len(row) ≥ len(s)): the
// cell-sum update of one user's row of slow gains.
func addScaled(s []float64, d float64, row []float64) {
	if len(s) == 0 {
		return
	}
	if !useAVX {
		floats.AddScaled(s, d, row[:len(s)])
		return
	}
	_ = row[len(s)-1]
	addScaledAVX(s, d, &row[0])
}

// updateSumsAVX is updateSums's scaling, mover list and row updates in
// one AVX call (rows_amd64.s), the same bits; the caller checks lengths.
//
//go:noescape
func updateSumsAVX(s []float64, b float64, pCur, pPrev *float64, n int, slow *float64, mv *int32, dv *float64)

// updateSums512 is updateSumsAVX for 57 to 64 cells with the sums held in
// AVX-512 registers (rows_amd64.s), the same bits; the caller checks
// lengths.
//
//go:noescape
func updateSums512(s []float64, b float64, pCur, pPrev *float64, n int, slow *float64, mv *int32, dv *float64)

// fullSums512 is fullSums for 57 to 64 cells in AVX-512 (rows_amd64.s):
// s = Σ_u p[u]·slow[u·len(s):] over u < n, from zero, the same bits as
// clearing s and adding the rows with addScaled; the caller checks
// lengths.
//
//go:noescape
func fullSums512(s []float64, p *float64, n int, slow *float64)

// fullSumsFast runs fullSums512 when the CPU has AVX-512, the layout has
// 57 to 64 cells and every slice holds what it reads (slow: len(p) rows
// of len(s)), and reports whether it did.
func fullSumsFast(s, p, slow []float64) bool {
	n := len(p)
	if !useAVX || !in512(len(s)) || n == 0 || len(slow) < n*len(s) {
		return false
	}
	fullSums512(s, &p[0], n, &slow[0])
	return true
}

// useAVX512 selects updateSums512 for layouts of 57 to 64 cells (tests
// switch it off to compare).
var useAVX512 = cpu.X86.HasAVX512F

// in512 reports whether the AVX-512 cell-sum kernels take a layout of C
// cells: they hold 57 to 64 sums in eight registers.
func in512(C int) bool { return useAVX512 && C > 56 && C <= 64 }

// updateSumsFast runs updateSums512 (57 to 64 cells, AVX-512) or
// updateSumsAVX when the CPU has AVX and every slice
// holds what it reads (slow: n rows of len(s)), and reports whether it did.
func updateSumsFast(s []float64, b float64, pCur, pPrev, slow []float64, mv []int32, dv []float64) bool {
	n := len(pCur)
	if !useAVX || n == 0 || len(s) == 0 || len(pPrev) < n || len(mv) < n || len(dv) < n || len(slow) < n*len(s) {
		return false
	}
	if in512(len(s)) {
		updateSums512(s, b, &pCur[0], &pPrev[0], n, &slow[0], &mv[0], &dv[0])
		return true
	}
	updateSumsAVX(s, b, &pCur[0], &pPrev[0], n, &slow[0], &mv[0], &dv[0])
	return true
}

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

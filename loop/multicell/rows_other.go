//go:build !amd64 || purego

package multicell

import "gonum.org/v1/gonum/floats"

// useAVX is false off amd64 and with the purego build tag.
var useAVX = false

// useAVX512 is false off amd64 and with the purego build tag.
var useAVX512 = false

// addScaled adds d·row to s element by element (len(row) ≥ len(s)):
// gonum's floats.AddScaled.
func addScaled(s []float64, d float64, row []float64) { floats.AddScaled(s, d, row[:len(s)]) }

func updateSumsFast(s []float64, b float64, pCur, pPrev, slow []float64, mv []int32, dv []float64) bool {
	return false
}

func fullSumsFast(s, p, slow []float64) bool { return false }

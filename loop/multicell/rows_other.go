//go:build !amd64 || purego

package multicell

// useAVX is false off amd64 and with the purego build tag.
var useAVX = false

// addScaled adds d·row to s element by element (len(row) ≥ len(s)).
func addScaled(s []float64, d float64, row []float64) { addScaledGo(s, d, row) }

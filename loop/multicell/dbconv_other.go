//go:build !amd64 || purego

package multicell

// useAVX2 is false off amd64 and with the purego build tag.
var useAVX2 = false

func linFromDBFast(x []float64) int { return 0 }

func linToDBFast(dst, src []float64, floor float64) int { return 0 }

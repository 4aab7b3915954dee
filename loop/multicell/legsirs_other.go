//go:build !amd64 || purego

package multicell

const haveLegSIRsAsm = false

func legSIRsFast(es []legEntry, fk []float64, su []userSlot, own, rx, acc []float64, cnt []int32, pg, noise float64) {
	panic("multicell: no assembly loop on this build") // programmer error: legSIRs checks haveLegSIRsAsm
}

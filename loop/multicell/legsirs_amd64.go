//go:build amd64 && !purego

package multicell

// legSIRsAsm is legSIRsGo's loop for plain slots in assembly
// (legsirs_amd64.s), the same bits; legSIRs checks the indices first.
//
//go:noescape
func legSIRsAsm(es *legEntry, n int, fk *float64, su *userSlot, own, rx, acc *float64, cnt *int32, pg, noise float64)

// haveLegSIRsAsm: the assembly loop exists on this build (tests switch
// useLegSIRsAsm off to compare).
const haveLegSIRsAsm = true

func legSIRsFast(es []legEntry, fk []float64, su []userSlot, own, rx, acc []float64, cnt []int32, pg, noise float64) {
	legSIRsAsm(&es[0], len(es), &fk[0], &su[0], &own[0], &rx[0], &acc[0], &cnt[0], pg, noise)
}

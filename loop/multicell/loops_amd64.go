//go:build amd64 && !purego

package multicell

// legSIRsAsm is legSIRsGo's loop for plain slots in assembly
// (loops_amd64.s), the same bits; legSIRs checks the indices first.
//
//go:noescape
func legSIRsAsm(es *legEntry, n int, fk *float64, su *userSlot, own, rx, acc *float64, cnt *int32, pg, noise float64)

// haveLoopAsm: the assembly loops exist on this build (tests switch
// useLoopAsm off to compare).
const haveLoopAsm = true

func legSIRsFast(es []legEntry, fk []float64, su []userSlot, own, rx, acc []float64, cnt []int32, pg, noise float64) {
	legSIRsAsm(&es[0], len(es), &fk[0], &su[0], &own[0], &rx[0], &acc[0], &cnt[0], pg, noise)
}

// plainUsersAsm is the loop over users of a plain slot in assembly
// (loops_amd64.s): plainUsers's Go loop, the same bits.
//
//go:noescape
func plainUsersAsm(a *plainArgs)

func plainUsersFast(a *plainArgs) { plainUsersAsm(a) }

// legCorrectionsAsm is legCorrectionsGo's loop in assembly (loops_amd64.s),
// the same bits; legCorrections checks the indices first.
//
//go:noescape
func legCorrectionsAsm(es *legEntry, n int, corr, p, f *float64)

func legCorrectionsFast(es []legEntry, corr, p, f []float64) {
	legCorrectionsAsm(&es[0], len(es), &corr[0], &p[0], &f[0])
}

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

// shadowSitesAVX is shadowSitesGo in AVX on n (a multiple of 4) sites,
// rowsSSE rows3Go in scalar SSE2 (gains_amd64.s), the same bits.
//
//go:noescape
func shadowSitesAVX(b, nd, path, site *float64, n int, k, w, common, sdB float64)

//go:noescape
func rows3SSE(row, ant, site *float64, n int)

// shadowSites is shadowSitesGo, in AVX when every slice has room for
// whole groups of four (their padding stays finite: b's and nd's at 0).
func shadowSites(b, nd, path, site []float64, k, w, common, sdB float64) {
	n4 := (len(b) + 3) &^ 3
	if useLoopAsm && useAVX && n4 > 0 && cap(b) >= n4 && len(nd) >= n4 && cap(path) >= n4 && cap(site) >= n4 {
		shadowSitesAVX(&b[:n4][0], &nd[0], &path[:n4][0], &site[:n4][0], n4, k, w, common, sdB)
		return
	}
	shadowSitesGo(b, nd[:len(b)], path, site, k, w, common, sdB)
}

// rows3 is rows3Go, in assembly.
func rows3(row, ant, g []float64) {
	if useLoopAsm && len(g) > 0 && len(row) >= 3*len(g) && len(ant) >= 3*len(g) {
		rows3SSE(&row[0], &ant[0], &g[0], len(g))
		return
	}
	rows3Go(row, ant, g)
}

// accumUsersAVX2 is accumUsersGo for n users, n a multiple of 4, in AVX2
// (record_amd64.s), the same bits; accumUsers checks the lengths.
//
//go:noescape
func accumUsersAVX2(ub, sirDB, tDB, pDB *float64, flags *uint8, n int)

// accumUsersFast runs accumUsersAVX2 on the whole groups of four users
// when the CPU has AVX2 and returns how many users it did.
func accumUsersFast(ub, sirDB, tDB, pDB []float64, flags []uint8) int {
	n := len(sirDB) &^ 3
	if !useLoopAsm || !useAVX2 || n == 0 || len(tDB) < n || len(pDB) < n || len(flags) < n || len(ub) < n/4*ubGroup {
		return 0
	}
	accumUsersAVX2(&ub[0], &sirDB[0], &tDB[0], &pDB[0], &flags[0], n)
	return n
}

//go:build !amd64 || purego

package multicell

const haveLoopAsm = false

func legSIRsFast(es []legEntry, fk []float64, su []userSlot, own, rx, acc []float64, cnt []int32, pg, noise float64) {
	panic("multicell: no assembly loop on this build") // programmer error: legSIRs checks haveLoopAsm
}

func plainUsersFast(a *plainArgs) {
	panic("multicell: no assembly loop on this build") // programmer error: plainUsers checks haveLoopAsm
}

func legCorrectionsFast(es []legEntry, corr, p, f []float64) {
	panic("multicell: no assembly loop on this build") // programmer error: legCorrections checks haveLoopAsm
}

func shadowSites(b, nd, path, site []float64, k, w, common, sdB float64) {
	shadowSitesGo(b, nd[:len(b)], path, site, k, w, common, sdB)
}

func rows3(row, ant, g []float64) { rows3Go(row, ant, g) }

func accumUsersFast(ub, sirDB, tDB, pDB []float64, flags []uint8) int { return 0 }

package multicell

import (
	"context"
	"math"
	"math/rand/v2"
	"slices"
	"testing"
	"unsafe"
)

// TestLegLayout: the field offsets the assembly loop reads
// (loops_amd64.s).
func TestLegLayout(t *testing.T) {
	var e legEntry
	var s userSlot
	checkOffsets(t, []offsetCase{
		{"legEntry size", unsafe.Sizeof(e), 32},
		{"legEntry.g", unsafe.Offsetof(e.g), 0},
		{"legEntry.own", unsafe.Offsetof(e.own), 8},
		{"legEntry.j", unsafe.Offsetof(e.j), 16},
		{"legEntry.u", unsafe.Offsetof(e.u), 20},
		{"legEntry.c", unsafe.Offsetof(e.c), 24},
		{"userSlot size", unsafe.Sizeof(s), 32},
		{"userSlot.p", unsafe.Offsetof(s.p), 0},
		{"userSlot.tgt", unsafe.Offsetof(s.tgt), 8},
		{"userSlot.best", unsafe.Offsetof(s.best), 16},
		{"userSlot.up", unsafe.Offsetof(s.up), 24},
	})
}

// TestLegSIRsAsmMatchesGo: the assembly loop over legs gives the same bits
// as the Go loop (own-cell powers, accumulators, counts, best SIRs and
// commands) on random lists, including SIRs equal to the target, legs
// whose interference is below the noise floor, zero gains and several
// legs of a user in one cell.
func TestLegSIRsAsmMatchesGo(t *testing.T) {
	if !useLoopAsm {
		t.Skip("no assembly loop on this build: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(5, 6))
	for trial := 0; trial < 200; trial++ {
		U, C, ma := 1+r.IntN(40), 1+r.IntN(20), 1+r.IntN(6)
		mk := func() *rep {
			return &rep{C: C, U: U, pg: math.Exp(r.NormFloat64()), noiseMW: math.Exp(r.NormFloat64() - 10),
				own: make([]float64, C), rx: make([]float64, C), legAcc: make([]float64, U*ma), legN: make([]int32, U*ma),
				slotU: make([]userSlot, U), legSIR: make([]float64, U*ma)}
		}
		a := mk()
		fk := make([]float64, U*ma)
		for i := range fk {
			fk[i] = r.ExpFloat64()
			if r.IntN(20) == 0 {
				fk[i] = 0
			}
		}
		for c := range a.rx {
			a.rx[c] = math.Exp(r.NormFloat64()*3 - 8)
			a.own[c] = r.Float64() * a.rx[c]
		}
		for u := range a.slotU {
			a.slotU[u] = userSlot{p: math.Exp(r.NormFloat64()), tgt: math.Exp(r.NormFloat64()), best: r.Float64() * 0.1, up: uint8(r.IntN(2))}
		}
		for j := range a.legAcc {
			a.legAcc[j], a.legN[j] = r.Float64()*10, int32(r.IntN(15))
		}
		for u := 0; u < U; u++ {
			for l := 0; l < ma; l++ {
				if r.IntN(2) == 0 {
					continue
				}
				e := legEntry{g: math.Exp(r.NormFloat64()*4 - 6), own: float64(r.IntN(2)), j: int32(u*ma + l), u: int32(u), c: int32(r.IntN(C))}
				if r.IntN(30) == 0 {
					e.g = 0
				}
				a.legs.add(e)
			}
		}
		if len(a.legs.e) > 0 && r.IntN(4) == 0 {
			// A SIR exactly at the target: the command must say down in both.
			e := a.legs.e[0]
			s := &a.slotU[e.u]
			sig := s.p * e.g * fk[e.j]
			s.tgt = a.pg * sig / max(a.rx[e.c]-sig, a.noiseMW)
		}
		b := mk()
		b.legs.e = a.legs.e
		copy(b.own, a.own)
		copy(b.rx, a.rx)
		copy(b.legAcc, a.legAcc)
		copy(b.legN, a.legN)
		copy(b.slotU, a.slotU)
		b.pg, b.noiseMW = a.pg, a.noiseMW
		a.legSIRs(fk, true)
		b.legSIRsGo(fk, true)
		same := func(x, y []float64) bool {
			for i := range x {
				if math.Float64bits(x[i]) != math.Float64bits(y[i]) {
					return false
				}
			}
			return true
		}
		if !same(a.own, b.own) || !same(a.legAcc, b.legAcc) {
			t.Fatalf("trial %d: own or accumulators differ", trial)
		}
		for j := range a.legN {
			if a.legN[j] != b.legN[j] {
				t.Fatalf("trial %d: count %d: %d, Go %d", trial, j, a.legN[j], b.legN[j])
			}
		}
		for u := range a.slotU {
			x, y := a.slotU[u], b.slotU[u]
			if math.Float64bits(x.best) != math.Float64bits(y.best) || x.up != y.up {
				t.Fatalf("trial %d user %d: asm %+v, Go %+v", trial, u, x, y)
			}
		}
	}
}

// TestLegSIRsChecksIndices: a leg list reaching past its arrays is a
// programmer error the assembly loop must not run on.
func TestLegSIRsChecksIndices(t *testing.T) {
	if !useLoopAsm {
		t.Skip("no assembly loop on this build")
	}
	rp := &rep{C: 2, U: 1, own: make([]float64, 2), rx: make([]float64, 2), legAcc: make([]float64, 1), legN: make([]int32, 1), slotU: make([]userSlot, 1)}
	rp.legs.e = []legEntry{{c: 2}}
	rp.legs.maxC = 2
	defer func() {
		if recover() == nil {
			t.Error("no panic for a cell index past the cell arrays")
		}
	}()
	rp.legSIRs(make([]float64, 1), true)
}

// TestLoopLayout: the offsets the assembly loop over users reads
// (plainUsersAsm): plainArgs, and user's power and target fields.
func TestLoopLayout(t *testing.T) {
	var a plainArgs
	var us user
	checkOffsets(t, []offsetCase{
		{"users", unsafe.Offsetof(a.users), 0}, {"n", unsafe.Offsetof(a.n), 8}, {"su", unsafe.Offsetof(a.su), 16},
		{"pCur", unsafe.Offsetof(a.pCur), 24}, {"cmds", unsafe.Offsetof(a.cmds), 32}, {"recSIR", unsafe.Offsetof(a.recSIR), 40},
		{"recPDB", unsafe.Offsetof(a.recPDB), 48}, {"recTDB", unsafe.Offsetof(a.recTDB), 56}, {"recFlags", unsafe.Offsetof(a.recFlags), 64},
		{"lin", unsafe.Offsetof(a.lin), 72}, {"lim", unsafe.Offsetof(a.lim), 88}, {"limDB", unsafe.Offsetof(a.limDB), 104},
		{"stepDB", unsafe.Offsetof(a.stepDB), 120}, {"marginLin", unsafe.Offsetof(a.marginLin), 136}, {"pAtMax", unsafe.Offsetof(a.pAtMax), 144},
		{"ups", unsafe.Offsetof(a.ups), 152}, {"downs", unsafe.Offsetof(a.downs), 160}, {"stride", unsafe.Offsetof(a.stride), 168}, {"pPrev", unsafe.Offsetof(a.pPrev), 176},
		{"user.p", unsafe.Offsetof(us.p), 0}, {"user.pDB", unsafe.Offsetof(us.pDB), 8},
		{"user.target", unsafe.Offsetof(us.target), 16}, {"user.targetDB", unsafe.Offsetof(us.targetDB), 24},
	})
	if recOutage != 1 || recAtMax != 2 {
		t.Errorf("flags %d, %d: the assembly sets 1 and 2", recOutage, recAtMax)
	}
}

// TestLoopAsmMatchesGo: runs with the assembly loops (all of them: the
// slot loop's, the cell sums', the shadowing updates' and the dB
// conversions') give reports identical to the Go loops' (every figure,
// bit for bit) where the slot loop's assembly runs: closed loop, feedback delay 0, no per-leg draws; with
// users held at the power limits (a low maximum power, a high minimum) and
// with a warm-up, so that records, flags and limits are all exercised.
func TestLoopAsmMatchesGo(t *testing.T) {
	if !haveLoopAsm {
		t.Skip("no assembly loops on this build: only the Go code runs")
	}
	base := smallLayout()
	base.InnerLoop = InnerLoop{}
	base.Run.Replications = 1
	base.Groups[0].CountPerCell = 8 // a helper goroutine as well (≥ 128 users)
	lowMax := base
	lowMax.InnerLoop.MaxPowerDBm = -10
	highMin := base
	highMin.InnerLoop.MinPowerDBm = 10
	bigStep := base
	bigStep.InnerLoop.StepDB = 3
	noFade := base
	noFade.Channel.FastFading = FastFadingNone
	big := base // 57 cells: the AVX-512 cell sums where the CPU has them
	big.Layout.Sites, big.Groups = 19, []Group{{CountPerCell: 3, SpeedKmh: 60}}
	big.Run.Slots = 400
	for name, cfg := range map[string]Config{"base": base, "low max power": lowMax, "high min power": highMin, "3 dB step": bigStep, "no fast fading": noFade, "19 sites": big} {
		var out [2][]byte
		for i, asm := range []bool{true, false} {
			avx, avx2 := useAVX, useAVX2
			useLoopAsm = asm
			if !asm {
				useAVX, useAVX2 = false, false
			}
			rep, err := Run(context.Background(), cfg)
			useLoopAsm, useAVX, useAVX2 = haveLoopAsm, avx, avx2
			if err != nil {
				t.Fatalf("%s: %v", name, err)
			}
			out[i] = reportText(rep)
		}
		if string(out[0]) != string(out[1]) {
			t.Errorf("%s: reports differ between the assembly and Go loops", name)
		}
	}
}

// TestLegCorrectionsAsmMatchesGo: the assembly corrections give the same
// bits as the Go loop on random lists (several legs per cell, gains of 0,
// fading above and below 1).
func TestLegCorrectionsAsmMatchesGo(t *testing.T) {
	if !useLoopAsm {
		t.Skip("no assembly loops on this build: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(7, 8))
	for trial := 0; trial < 200; trial++ {
		U, C, ma := 1+r.IntN(40), 1+r.IntN(20), 1+r.IntN(6)
		p, f := make([]float64, U), make([]float64, U*ma)
		for u := range p {
			p[u] = math.Exp(r.NormFloat64() * 3)
		}
		for j := range f {
			f[j] = r.ExpFloat64()
		}
		var L legList
		for u := 0; u < U; u++ {
			for l := 0; l < ma; l++ {
				if r.IntN(2) == 0 {
					e := legEntry{g: math.Exp(r.NormFloat64()*4 - 6), j: int32(u*ma + l), u: int32(u), c: int32(r.IntN(C))}
					if r.IntN(30) == 0 {
						e.g = 0
					}
					L.add(e)
				}
			}
		}
		got, want := make([]float64, C), make([]float64, C)
		for c := range got {
			got[c] = r.NormFloat64()
			want[c] = got[c]
		}
		rp := &rep{legs: L}
		rp.legCorrections(got, p, f)
		legCorrectionsGo(L.e, want, p, f)
		for c := range got {
			if math.Float64bits(got[c]) != math.Float64bits(want[c]) {
				t.Fatalf("trial %d cell %d: asm %v, Go %v", trial, c, got[c], want[c])
			}
		}
	}
}

// TestShadowSitesAndRowsAsmMatchGo: the assembly shadowing step, site
// gains and 3-sector rows give the same bits as the Go loops, for 1, 7
// and 19 sites (whole groups of four and padding).
func TestShadowSitesAndRowsAsmMatchGo(t *testing.T) {
	if !useLoopAsm || !useAVX {
		t.Skip("no assembly loops on this build: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(11, 12))
	for _, S := range []int{1, 7, 19} {
		n4 := (S + 3) &^ 3
		for trial := 0; trial < 50; trial++ {
			mk := func() []float64 { return make([]float64, S, n4) }
			b1, b2, path, s1, s2 := mk(), mk(), mk(), mk(), mk()
			nd := make([]float64, maxSites+3)
			for i := 0; i < S; i++ {
				b1[i] = r.NormFloat64()
				b2[i] = b1[i]
				path[i] = -100 - 60*r.Float64()
				nd[i] = r.NormFloat64()
			}
			k := math.Exp(-r.Float64() * 0.1)
			w, common, sdB := math.Sqrt(1-k*k), r.NormFloat64()*4, 8*math.Sqrt(0.5)
			shadowSites(b1, nd, path, s1, k, w, common, sdB)
			shadowSitesGo(b2, nd[:S], path, s2, k, w, common, sdB)
			ant := make([]float64, 3*S)
			for i := range ant {
				ant[i] = math.Exp(-r.Float64() * 5)
			}
			r1, r2 := make([]float64, 3*S), make([]float64, 3*S)
			rows3(r1, ant, s1)
			rows3Go(r2, ant, s2)
			for i := 0; i < S; i++ {
				if math.Float64bits(b1[i]) != math.Float64bits(b2[i]) || math.Float64bits(s1[i]) != math.Float64bits(s2[i]) {
					t.Fatalf("S=%d site %d: asm (%v, %v), Go (%v, %v)", S, i, b1[i], s1[i], b2[i], s2[i])
				}
			}
			for i := range r1 {
				if math.Float64bits(r1[i]) != math.Float64bits(r2[i]) {
					t.Fatalf("S=%d cell %d: asm %v, Go %v", S, i, r1[i], r2[i])
				}
			}
			if pad := b1[:n4][S:]; len(pad) > 0 && pad[0] != 0 {
				t.Fatalf("S=%d: padding of the shadowing parts became %v", S, pad)
			}
		}
	}
}

// TestUpdateSumsAVXMatchesGo: the one-call AVX cell-sum update gives the
// same bits as the Go code (scaling, movers, gonum's row updates) for
// layouts of 1 to 64 cells (57 to 64: the AVX-512 kernel where the CPU has
// it), with about half the users moved by the common
// factor exactly.
func TestUpdateSumsAVXMatchesGo(t *testing.T) {
	if !useAVX {
		t.Skip("no AVX on this machine: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(13, 14))
	for _, C := range []int{1, 3, 7, 8, 9, 21, 56, 57, 60, 64} {
		for trial := 0; trial < 20; trial++ {
			U := 1 + r.IntN(300)
			b := math.Pow(10, 0.1*float64(2*r.IntN(2)-1))
			rp := &rep{C: C, U: U, sums: make([]float64, C), pPrev: make([]float64, U), pCur: make([]float64, U),
				slow: make([]float64, U*C), movers: make([]int32, U), moverD: make([]float64, U), upLin: b, downLin: b}
			for u := 0; u < U; u++ {
				rp.pPrev[u] = math.Exp(r.NormFloat64() * 3)
				rp.pCur[u] = b * rp.pPrev[u]
				if r.IntN(2) == 0 {
					rp.pCur[u] = rp.pPrev[u] / b
				}
			}
			for i := range rp.slow {
				rp.slow[i] = math.Exp(r.NormFloat64()*5 - 10)
			}
			for c := range rp.sums {
				rp.sums[c] = r.Float64()
			}
			want := append([]float64(nil), rp.sums...)
			rp.updateSums()
			got := rp.sums
			useAVX = false
			rp.sums = want
			rp.updateSums()
			useAVX = true
			for c := range got {
				if math.Float64bits(got[c]) != math.Float64bits(want[c]) {
					t.Fatalf("C=%d U=%d cell %d: AVX %v, Go %v", C, U, c, got[c], want[c])
				}
			}
		}
	}
}

// TestFullSums512MatchesGo: the AVX-512 full cell sums give the same bits
// as clearing the sums and adding every user's row with addScaled, for 57
// to 64 cells.
func TestFullSums512MatchesGo(t *testing.T) {
	if !useAVX || !useAVX512 {
		t.Skip("no AVX-512 on this machine: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(15, 16))
	for _, C := range []int{57, 60, 64} {
		for trial := 0; trial < 20; trial++ {
			U := 1 + r.IntN(300)
			rp := &rep{C: C, U: U, sums: make([]float64, C), users: make([]user, U), pFull: make([]float64, U), slow: make([]float64, U*C)}
			for u := range rp.users {
				rp.users[u].p = math.Exp(r.NormFloat64() * 3)
			}
			for i := range rp.slow {
				rp.slow[i] = math.Exp(r.NormFloat64()*5 - 10)
			}
			rp.fullSums()
			got := append([]float64(nil), rp.sums...)
			useAVX512 = false
			rp.fullSums()
			useAVX512 = true
			for c := range got {
				if math.Float64bits(got[c]) != math.Float64bits(rp.sums[c]) {
					t.Fatalf("C=%d U=%d cell %d: AVX-512 %v, Go %v", C, U, c, got[c], rp.sums[c])
				}
			}
		}
	}
}

// TestAccumUsersMatchesGo: the AVX2 per-user block sums give the same
// bits as the Go loop, for user counts that are and are not whole groups
// of four (the Go loop takes the rest), over several slots in a row, with
// every flag combination, and a block's flush gives the batch and
// per-user sums of the per-slot definitions (outage, at max, edge, legs
// by handover state, block ends: whole numbers, exact in any order).
func TestAccumUsersMatchesGo(t *testing.T) {
	if !useLoopAsm || !useAVX2 {
		t.Skip("no AVX2 loop on this build: only the Go code runs")
	}
	r := rand.New(rand.NewPCG(15, 16))
	for trial := 0; trial < 60; trial++ {
		n := 1 + r.IntN(300)
		a, b := make([]float64, ubLen(n)), make([]float64, ubLen(n))
		for i := range a {
			a[i] = r.NormFloat64()
			b[i] = a[i]
		}
		for slot := 0; slot < 3; slot++ {
			sirDB, tDB, pDB := make([]float64, n), make([]float64, n), make([]float64, n)
			flags := make([]uint8, n)
			for u := 0; u < n; u++ {
				sirDB[u], tDB[u], pDB[u] = r.NormFloat64()*5, r.NormFloat64()*2+5, r.NormFloat64()*10
				flags[u] = uint8(r.IntN(16))
			}
			accumUsers(a, sirDB, tDB, pDB, flags)
			accumUsersGo(b, sirDB, tDB, pDB, flags)
		}
		for i := range a {
			if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
				t.Fatalf("trial %d (n %d) entry %d: AVX2 %v, Go %v", trial, n, i, a[i], b[i])
			}
		}
	}
	if LegStates != 3 || recOutage != 1 || recAtMax != 2 || recBlockEnd != 4 || recBlockErr != 8 {
		t.Errorf("LegStates %d, flags %d %d %d %d: the loops assume 3, 1, 2, 4, 8", LegStates, recOutage, recAtMax, recBlockEnd, recBlockErr)
	}
}

// TestFlushUsersCounts: two slots of three users through users1 and one
// flush give the counts of the per-slot definitions.
func TestFlushUsersCounts(t *testing.T) {
	rp := &rep{U: 3, C: 2, edge: []float64{0, 1, 1}}
	rp.cfg.Run.Batches = 4
	rp.cfg.Run.Slots = 100
	c := newCollector(rp, 0)
	r := newBlockRec(3, 2)
	r.nLegs = []int8{1, 2, 5}
	for k, fl := range [][]uint8{{recOutage, recAtMax | recOutage, recBlockEnd}, {0, recAtMax, recBlockEnd | recBlockErr}} {
		for u := 0; u < 3; u++ {
			r.sir[k*3+u], r.targetDB[k*3+u], r.pDB[k*3+u] = 10, 9, float64(u)
			r.flags[k*3+u] = fl[u]
		}
		c.users1(rp, r, k*3)
	}
	c.flushUsers(rp, r)
	b := c.batches[0]
	for _, x := range []struct {
		name      string
		got, want float64
	}{
		{"outage", b.outage, 2}, {"at max", b.atMax, 2}, {"edge slots", b.edgeSlots, 4}, {"edge at max", b.edgeAtMax, 2},
		{"1-leg slots", b.legSlots[0], 2}, {"2-leg slots", b.legSlots[1], 2}, {"3+-leg slots", b.legSlots[2], 2},
		{"1-leg outage", b.legOutage[0], 1}, {"2-leg outage", b.legOutage[1], 1}, {"2-leg at max", b.legAtMax[1], 2},
		{"blocks", b.blocks, 2}, {"block errors", b.blockErrs, 1}, {"user-slots", b.userSlots, 6},
		{"SIR error", b.sirErrDB, 6}, {"SIR error²", b.sirErrDB2, 6}, {"Tx", b.txDBm, 6},
		{"user 1 outage", c.users[1].outage, 1}, {"user 2 Tx", c.users[2].txDBm, 4},
	} {
		if math.Abs(x.got-x.want) > 1e-9 {
			t.Errorf("%s = %v, want %v", x.name, x.got, x.want)
		}
	}
	if c.ubSlots != 0 || slices.ContainsFunc(c.ub, func(v float64) bool { return v != 0 }) {
		t.Error("the flush left per-user sums behind")
	}
}

// offsetCase is a field offset (or size) the assembly relies on.
type offsetCase struct {
	name      string
	got, want uintptr
}

// checkOffsets reports every offset that is not where the assembly reads it.
func checkOffsets(t *testing.T, cases []offsetCase) {
	t.Helper()
	for _, c := range cases {
		if c.got != c.want {
			t.Errorf("%s at %d, want %d", c.name, c.got, c.want)
		}
	}
}

package multicell

import (
	"math"
	"math/rand/v2"
	"testing"
	"unsafe"
)

// TestLegLayout: the field offsets the assembly loop reads
// (legsirs_amd64.s).
func TestLegLayout(t *testing.T) {
	var e legEntry
	var s userSlot
	for _, c := range []struct {
		name      string
		got, want uintptr
	}{
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
	} {
		if c.got != c.want {
			t.Errorf("%s = %d, want %d", c.name, c.got, c.want)
		}
	}
}

// TestLegSIRsAsmMatchesGo: the assembly loop over legs gives the same bits
// as the Go loop (own-cell powers, accumulators, counts, best SIRs and
// commands) on random lists, including SIRs equal to the target, legs
// whose interference is below the noise floor, zero gains and several
// legs of a user in one cell.
func TestLegSIRsAsmMatchesGo(t *testing.T) {
	if !useLegSIRsAsm {
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
				a.legs.e = append(a.legs.e, e)
				a.legs.maxJ, a.legs.maxU, a.legs.maxC = max(a.legs.maxJ, e.j), max(a.legs.maxU, e.u), max(a.legs.maxC, e.c)
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
	if !useLegSIRsAsm {
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

package loop

import (
	"context"
	"fmt"
	"os"
	"os/exec"
	"strconv"
	"strings"
	"testing"
	"time"
)

// TestPeerSideBySide measures the engine against the numba peer
// (shared/bench/peer_numba.py) on this machine, alternating runs of both,
// and checks the canonical figures against the peer's. It runs only when
// FADELOOP_PEER names the peer script, e.g.
//
//	apt-get install -y python3-numba
//	FADELOOP_PEER=/work/shared/bench/peer_numba.py go test -run PeerSideBySide -v ./loop/
//
// FADELOOP_PEER_PYTHON overrides the interpreter (default /usr/bin/python3)
// and FADELOOP_PEER_ROUNDS the number of alternating rounds (default 3).
func TestPeerSideBySide(t *testing.T) {
	script := os.Getenv("FADELOOP_PEER")
	if script == "" {
		t.Skip("set FADELOOP_PEER to the path of peer_numba.py to run the side-by-side comparison")
	}
	py := os.Getenv("FADELOOP_PEER_PYTHON")
	if py == "" {
		py = "/usr/bin/python3"
	}
	rounds := 3
	if s := os.Getenv("FADELOOP_PEER_ROUNDS"); s != "" {
		if n, err := strconv.Atoi(s); err == nil && n > 0 {
			rounds = n
		}
	}
	sc := CanonicalScenario()
	var peer map[string]float64
	var bestPeer, bestOurs float64
	var rep *Report
	for r := 0; r < rounds; r++ {
		out, err := exec.Command(py, script).CombinedOutput()
		if err != nil {
			t.Fatalf("peer: %v\n%s", err, out)
		}
		if peer, err = parsePeer(string(out)); err != nil {
			t.Fatal(err)
		}
		bestPeer = max(bestPeer, peer["user-slots/s"])
		t0 := time.Now()
		rep, err = Run(context.Background(), sc, RunOptions{})
		if err != nil {
			t.Fatal(err)
		}
		ours := float64(rep.SimulatedUserSlots) / time.Since(t0).Seconds()
		bestOurs = max(bestOurs, ours)
		t.Logf("round %d: peer %.4g user-slots/s, fadeloop %.4g user-slots/s, ratio %.2f", r, peer["user-slots/s"], ours, ours/peer["user-slots/s"])
	}
	t.Logf("best of %d: peer %.4g, fadeloop %.4g user-slots/s: ratio %.2f (target >= 10)", rounds, bestPeer, bestOurs, bestOurs/bestPeer)
	// For information: the same scenario with fading's default generator
	// (fewer sinusoids; its figures differ slightly from the peer's model).
	def := CanonicalScenario()
	def.Groups[0].Generator = GeneratorDefault
	t0 := time.Now()
	if _, err := Run(context.Background(), def, RunOptions{}); err != nil {
		t.Fatal(err)
	}
	ud := float64(def.Users()) * float64(def.Run.Slots) / time.Since(t0).Seconds()
	t.Logf("default generator: fadeloop %.4g user-slots/s, ratio %.2f to the best peer run", ud, ud/bestPeer)
	a := rep.Aggregate
	// Peer figures vs ours with our 95 % intervals (batch means).
	for _, c := range []struct {
		name string
		peer float64
		e    Estimate
	}{
		{"sir_err_mean_db", peer["sir_err_mean_db"], a.SIRErrorMeanDB},
		{"sir_err_std_db", peer["sir_err_std_db"], a.SIRErrorStdDB},
		{"outage", peer["outage"], a.OutageProbability},
		{"mean_tx_dbm", peer["mean_tx_dbm"], a.TxPowerMeanDBm},
	} {
		// The peer prints 3–4 significant digits: widen by its rounding.
		round := map[string]float64{"sir_err_mean_db": 5e-4, "sir_err_std_db": 5e-4, "outage": 5e-5, "mean_tx_dbm": 5e-3}[c.name]
		ok := c.peer >= c.e.CILow-round && c.peer <= c.e.CIHigh+round
		t.Logf("%-16s peer %-8.4g fadeloop %.4f [%.4f, %.4f] %s", c.name, c.peer, c.e.Value, c.e.CILow, c.e.CIHigh, map[bool]string{true: "agree", false: "DIFFER"}[ok])
		if !ok {
			t.Errorf("%s: peer %g outside fadeloop's interval [%g, %g]", c.name, c.peer, c.e.CILow, c.e.CIHigh)
		}
	}
}

// parsePeer reads the key=value line the peer prints.
func parsePeer(out string) (map[string]float64, error) {
	m := map[string]float64{}
	for _, f := range strings.Fields(out) {
		k, v, ok := strings.Cut(f, "=")
		if !ok {
			continue
		}
		if x, err := strconv.ParseFloat(v, 64); err == nil {
			m[k] = x
		}
	}
	if _, ok := m["user-slots/s"]; !ok {
		return nil, fmt.Errorf("peer output without user-slots/s: %q", out)
	}
	return m, nil
}

package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"time"

	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// progress shows how far a long call has come on standard error: a bar
// redrawn in place on a terminal (fraction, rate, time left), plain lines
// at most every few seconds otherwise, nothing when quiet.
type progress struct {
	w        io.Writer
	mode     string // "bar", "lines" or "none"
	unit     string // rate unit, e.g. "user-slots/s"
	start    time.Time
	last     time.Time
	lastFrac float64
	drawn    bool
	now      func() time.Time
}

// lineInterval is the least time between two plain progress lines.
const lineInterval = 2 * time.Second

// newProgress picks the display: --quiet or --progress none shows nothing;
// --progress auto draws a bar when w is a terminal and lines otherwise.
func (e *env) newProgress(unit string) *progress {
	mode := e.g.progress
	if e.g.quiet {
		mode = "none"
	}
	if mode == "auto" {
		mode = "lines"
		if isTerminal(e.stderr) {
			mode = "bar"
		}
	}
	return &progress{w: e.stderr, mode: mode, unit: unit, start: time.Now(), now: time.Now}
}

func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// update reports the fraction done (0..1) and the current rate (in p.unit).
func (p *progress) update(frac, rate float64) {
	if p.mode == "none" || math.IsNaN(frac) {
		return
	}
	frac = math.Min(math.Max(frac, 0), 1)
	now := p.now()
	elapsed := now.Sub(p.start)
	left := "?"
	if frac > 0.001 {
		rem := time.Duration(float64(elapsed) * (1 - frac) / frac)
		left = fmtDuration(rem)
	}
	switch p.mode {
	case "bar":
		if now.Sub(p.last) < 100*time.Millisecond && frac < 1 {
			return
		}
		const width = 30
		n := int(frac * width)
		bar := strings.Repeat("█", n) + strings.Repeat("░", width-n)
		fmt.Fprintf(p.w, "\r%s %5.1f%%  %s  %s left ", bar, 100*frac, render.FmtRate(rate, p.unit), left)
		p.drawn = true
	case "lines":
		// Quick calls print nothing; the closing 100 % line only follows
		// earlier lines.
		if now.Sub(p.start) < lineInterval || (frac < 1 && now.Sub(p.last) < lineInterval) {
			return
		}
		if frac >= 1 && (!p.drawn || p.lastFrac >= 1) {
			return
		}
		p.drawn = true
		fmt.Fprintf(p.w, "progress: %5.1f%% done, %s, %s left\n", 100*frac, render.FmtRate(rate, p.unit), left)
	}
	p.last = now
	p.lastFrac = frac
}

// done clears the bar line.
func (p *progress) done() {
	if p.mode == "lines" && p.drawn && p.lastFrac < 1 {
		fmt.Fprintf(p.w, "progress: done in %s\n", fmtDuration(p.now().Sub(p.start)))
	}
	if p.mode == "bar" && p.drawn {
		fmt.Fprintf(p.w, "\r%s\r", strings.Repeat(" ", 78))
		p.drawn = false
	}
}

// searchProgress shows the progress of a Tune or Capacity call: the
// server's fraction done (the search re-bounds the work it can still take
// as it goes) and the simulated user-slots per second.
func searchProgress(prog *progress) func(*pb.SearchProgress) {
	return func(p *pb.SearchProgress) {
		prog.update(p.GetFractionDone(), float64(p.GetUserSlotsDone())/math.Max(p.GetElapsedS(), 1e-9))
	}
}

func fmtDuration(d time.Duration) string {
	if d < 0 {
		d = 0
	}
	s := int(d.Round(time.Second) / time.Second)
	if s >= 3600 {
		return fmt.Sprintf("%d:%02d:%02d", s/3600, s/60%60, s%60)
	}
	return fmt.Sprintf("%d:%02d", s/60, s%60)
}

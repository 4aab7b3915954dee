package main

import (
	"bytes"
	"strings"
	"testing"
	"time"

	"github.com/fadeloop/fadeloop/client/render"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// fakeClock advances by hand.
type fakeClock struct{ t time.Time }

func (c *fakeClock) now() time.Time { return c.t }

func newTestProgress(mode string) (*progress, *bytes.Buffer, *fakeClock) {
	var b bytes.Buffer
	clk := &fakeClock{t: time.Unix(1000, 0)}
	p := &progress{w: &b, mode: mode, unit: "user-slots/s", start: clk.t, now: clk.now}
	return p, &b, clk
}

func TestProgressBar(t *testing.T) {
	p, b, clk := newTestProgress("bar")
	clk.t = clk.t.Add(10 * time.Second)
	p.update(0.25, 2.5e6)
	got := b.String()
	for _, want := range []string{"\r", " 25.0%", "2.50 M user-slots/s", "0:30 left", "███████"} {
		if !strings.Contains(got, want) {
			t.Errorf("bar %q lacks %q", got, want)
		}
	}
	b.Reset()
	p.done()
	if !strings.HasPrefix(b.String(), "\r") || strings.TrimSpace(b.String()) != "" {
		t.Errorf("done did not clear the bar: %q", b.String())
	}
}

// TestSearchProgressShowsServerFraction: a Tune or Capacity progress event
// is shown at the server's fraction_done (no estimate of the work on the
// client side), with the rate from user_slots_done and elapsed_s.
func TestSearchProgressShowsServerFraction(t *testing.T) {
	p, b, clk := newTestProgress("bar")
	clk.t = clk.t.Add(10 * time.Second)
	searchProgress(p)(&pb.SearchProgress{ReplicationsDone: 7, FractionDone: 0.4, UserSlotsDone: 3e7, ElapsedS: 10})
	got := b.String()
	for _, want := range []string{" 40.0%", "3.00 M user-slots/s", "0:15 left"} {
		if !strings.Contains(got, want) {
			t.Errorf("bar %q lacks %q", got, want)
		}
	}
}

func TestProgressLines(t *testing.T) {
	p, b, clk := newTestProgress("lines")
	// A call shorter than the line interval prints nothing at all.
	clk.t = clk.t.Add(time.Second)
	p.update(0.5, 1e6)
	p.update(1, 1e6)
	p.done()
	if b.Len() != 0 {
		t.Errorf("quick call printed %q", b.String())
	}
	p, b, clk = newTestProgress("lines")
	for i := 1; i <= 10; i++ {
		clk.t = clk.t.Add(time.Second)
		p.update(float64(i)/10, 3e3)
	}
	lines := strings.Split(strings.TrimSpace(b.String()), "\n")
	// Seconds 2..10 at most every 2 s: 2, 4, 6, 8, 10 (the last is 100 %).
	if len(lines) != 5 {
		t.Errorf("%d lines, want 5:\n%s", len(lines), b.String())
	}
	if !strings.Contains(lines[0], " 20.0% done, 3.0 k user-slots/s, 0:08 left") || strings.Contains(b.String(), "\r") {
		t.Errorf("line format: %q", lines[0])
	}
	if !strings.Contains(lines[len(lines)-1], "100.0%") {
		t.Errorf("last line %q is not 100 %%", lines[len(lines)-1])
	}
}

func TestProgressQuiet(t *testing.T) {
	e := &env{stderr: &bytes.Buffer{}, g: &globals{quiet: true, progress: "bar"}}
	p := e.newProgress("x/s")
	p.update(0.5, 1)
	p.done()
	if e.stderr.(*bytes.Buffer).Len() != 0 {
		t.Error("--quiet printed progress")
	}
	// Not a terminal: auto means lines.
	e = &env{stderr: &bytes.Buffer{}, g: &globals{progress: "auto"}}
	if p := e.newProgress("x/s"); p.mode != "lines" {
		t.Errorf("auto on a buffer: mode %q, want lines", p.mode)
	}
}

func TestTableAlignment(t *testing.T) {
	tb := render.NewTable("name", "value (dB)", "note").AlignRight(1)
	tb.Add("a", "1.00", "x")
	tb.Add("longer name", "-12.50", "")
	var b bytes.Buffer
	tb.Write(&b)
	want := "name         value (dB)  note\n" +
		"a                  1.00  x\n" +
		"longer name      -12.50\n"
	if b.String() != want {
		t.Errorf("got\n%s\nwant\n%s", b.String(), want)
	}
}

func TestHelpers(t *testing.T) {
	for _, c := range []struct {
		in   int64
		want string
	}{{0, "0"}, {999, "999"}, {1000, "1 000"}, {90000, "90 000"}, {1234567, "1 234 567"}, {-4500, "-4 500"}} {
		if got := render.GroupDigits(c.in); got != c.want {
			t.Errorf("groupDigits(%d) = %q, want %q", c.in, got, c.want)
		}
	}
	if got := render.Num(-0.0001, 2); got != "0.00" {
		t.Errorf("num(-0.0001, 2) = %q, want 0.00", got)
	}
	if got := render.FmtRate(1.23e7, "u/s"); got != "12.30 M u/s" {
		t.Errorf("fmtRate = %q", got)
	}
	var a axisList
	if err := a.Set("inner_loop.step_db=0.5:2:4"); err != nil {
		t.Fatal(err)
	}
	if ax := a[0]; len(ax.GetValues()) != 0 || ax.GetFirst() != 0.5 || ax.GetLast() != 2 || ax.GetCount() != 4 || ax.GetLog() {
		t.Errorf("range axis %v, want first 0.5, last 2, count 4 (the server expands it)", ax)
	}
	// Names are taken for enum axes (the server checks them), but not mixed
	// with numbers, nor empty or with separators inside.
	if err := (&axisList{}).Set("inner_loop.command=FIXED_STEP,ADAPTIVE"); err != nil {
		t.Errorf("enum axis by names: %v", err)
	}
	for _, bad := range []string{"x", "p=", "p=a,1", "p=a,,b", "p=a b", "p=1:2:0", "=1,2", "p=1:2:3:lin"} {
		if err := (&axisList{}).Set(bad); err == nil {
			t.Errorf("axis %q accepted", bad)
		}
	}
	if got := render.Wrap("aa bb cc dd", 5, "  "); got != "aa bb\n  cc dd" {
		t.Errorf("wrap = %q", got)
	}
}

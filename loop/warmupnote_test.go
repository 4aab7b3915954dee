package loop

import (
	"strings"
	"testing"
)

// TestWarmupNote: the note appears exactly when the outer loop runs and the
// warm-up is shorter than block_slots/bler_target slots (one expected block
// error per user at the target), and names both lengths.
func TestWarmupNote(t *testing.T) {
	for _, c := range []struct {
		name   string
		ol     OuterLoop
		warmup int64
		want   string // "" for no note, else a substring
	}{
		{"off", OuterLoop{Enabled: false, BLERTarget: 0.01, BlockSlots: 15}, 0, ""},
		{"1 % target, 15-slot blocks, 1499 slots", OuterLoop{Enabled: true, BLERTarget: 0.01, BlockSlots: 15}, 1499, "= 1500 slots"},
		{"1 % target, 15-slot blocks, 1500 slots", OuterLoop{Enabled: true, BLERTarget: 0.01, BlockSlots: 15}, 1500, ""},
		{"10 % target, 15-slot blocks, 10 slots", OuterLoop{Enabled: true, BLERTarget: 0.1, BlockSlots: 15}, 10, "warm-up of 10 slots"},
		{"10 % target, 15-slot blocks, 150 slots", OuterLoop{Enabled: true, BLERTarget: 0.1, BlockSlots: 15}, 150, ""},
		{"3 % target rounds up", OuterLoop{Enabled: true, BLERTarget: 0.03, BlockSlots: 1}, 33, "= 34 slots"},
	} {
		got := c.ol.WarmupNote(c.warmup)
		if (c.want == "") != (got == "") || !strings.Contains(got, c.want) {
			t.Errorf("%s: note %q, want one containing %q", c.name, got, c.want)
		}
	}
}

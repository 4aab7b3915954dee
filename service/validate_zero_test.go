package service

import (
	"fmt"
	"strings"
	"testing"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestProtoRuleTexts: a .proto rule's message names what 0 means where
// the rule admits it, gives the value, and carries no validator rule id.
// The defaults come from loop.Scenario.Normalise (sectors_per_site 1,
// max_active loop.DefaultMaxActive); a 0 dB window is an ordinary value
// (no note); a single-cell scenario has no layout defaults (no note).
func TestProtoRuleTexts(t *testing.T) {
	v, err := newProtoValidator()
	if err != nil {
		t.Fatal(err)
	}
	sc := harbourTown(t)
	sc.Layout.Sites, sc.Layout.SectorsPerSite = 5, 2
	sc.Layout.Handover.WindowDb, sc.Layout.Handover.MaxActive = 30, 9
	got := map[string]string{}
	for _, x := range v.check(&pb.SimulateRequest{Scenario: sc}, "") {
		got[x.Field] = x.Description
	}
	want := map[string]string{
		"scenario.layout.sites":               "must be in list [1, 7, 19] (0 or unset: single cell, no layout), got 5",
		"scenario.layout.sectors_per_site":    "must be in list [1, 3] (0 or unset: default 1), got 2",
		"scenario.layout.handover.window_db":  "must be greater than or equal to 0 and less than or equal to 20, got 30",
		"scenario.layout.handover.max_active": fmt.Sprintf("must be greater than or equal to 0 and less than or equal to 6 (0 or unset: default %d), got 9", loop.DefaultMaxActive),
	}
	if len(got) != len(want) {
		t.Errorf("got %d violations, want %d: %v", len(got), len(want), got)
	}
	for f, w := range want {
		if got[f] != w {
			t.Errorf("%s:\n got %q\nwant %q", f, got[f], w)
		}
	}
	// The same field in a single-cell scenario: no layout, no default.
	single := readScenario(t, "small.json")
	single.Layout = &pb.Layout{Handover: &pb.Handover{MaxActive: 9}}
	for _, x := range v.check(&pb.SimulateRequest{Scenario: single}, "") {
		if strings.Contains(x.Description, "(0 or unset") || strings.Contains(x.Description, "[int32.") {
			t.Errorf("single cell %s: %q", x.Field, x.Description)
		}
	}
	// A rule that rejects 0 outright (groups[0].count >= 1) gets no note.
	sc = harbourTown(t)
	sc.Groups[0].Count = -1
	for _, x := range v.check(&pb.SimulateRequest{Scenario: sc}, "") {
		if x.Field == "scenario.groups[0].count" && (strings.Contains(x.Description, "(0 or unset") || !strings.HasSuffix(x.Description, ", got -1")) {
			t.Errorf("%s: %q", x.Field, x.Description)
		}
	}
}

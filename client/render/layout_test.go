package render

import (
	"math"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// layoutReport is a small multi-cell report: 7 sites × 3 sectors with
// wrap-around, one cell, intervals given or withheld (NaN bounds), and the
// engine's notes (the multi-cell engine ends them with the caution).
func layoutReport(withheld bool) *pb.RunReport {
	nan := math.NaN()
	e := func(v float64) *pb.Estimate {
		if withheld {
			return &pb.Estimate{Value: v, CiLow: nan, CiHigh: nan}
		}
		return &pb.Estimate{Value: v, CiLow: 0.9 * v, CiHigh: 1.1 * v}
	}
	return &pb.RunReport{
		NormalisedScenario: &pb.Scenario{Layout: &pb.Layout{Sites: 7, SectorsPerSite: 3, InterSiteDistanceM: 750, WrapAround: true,
			Handover: &pb.Handover{WindowDb: 3, MaxActive: 3}}},
		Aggregate: &pb.Figures{Users: 2, OutageProbability: e(0.1)},
		Layout: &pb.LayoutReport{
			Overall: &pb.LayoutOverall{OtherToOwn: e(1.486), OtherToOwnSpreadP5: 0.527, OtherToOwnSpreadP95: 3.937, NoiseRiseDb: e(1.55),
				OutageProbability: e(0.1004), SoftHandoverShare: e(0.306), TimeAtMaxPower: e(0.0001), TimeAtMaxEdge: e(0),
				LegShare: []*pb.Estimate{e(0.694), e(0.212), e(0.093)}, OutageByLegs: []*pb.Estimate{e(0.104), e(0.0918), e(0.0932)},
				TimeAtMaxByLegs: []*pb.Estimate{e(0.0001), e(0), e(0)}},
			Cells: []*pb.LayoutCell{{Name: "S0/0", ServedUsers: 7.9, OtherToOwn: e(1.647), NoiseRiseDb: e(1.39)}},
		},
		Notes: []string{"multi-cell mode: see layout", "one replication: no intervals",
			loop.Caution},
	}
}

// TestLayoutTableText: the CLI layout table describes the layout in words
// ("with wrap-around", not a field dump), right-aligns every layout-wide
// value in one column (the f spread rows included: rune columns, the
// labels hold en dashes), and a run's table output carries the caution
// about real transmitters exactly once, whether RunTable printed the
// engine's notes (an interval withheld) or not.
func TestLayoutTableText(t *testing.T) {
	for _, withheld := range []bool{false, true} {
		rep := layoutReport(withheld)
		var b strings.Builder
		RunTable(&b, rep, false)
		s := b.String()
		if n := strings.Count(strings.ToLower(s), "do not replace the operator"); n != 1 {
			t.Errorf("withheld %v: caution %d times:\n%s", withheld, n, s)
		}
		if !strings.Contains(s, "layout: 7 sites × 3 sectors, inter-site distance 750 m, with wrap-around, handover window 3.0 dB (at most 3 cells in the active set)") ||
			strings.Contains(s, "wrap-around true") {
			t.Errorf("layout header:\n%s", s)
		}
		lines := strings.Split(s, "\n")
		start := -1
		for i, l := range lines {
			if strings.HasPrefix(l, "layout figure") {
				start = i
			}
		}
		if start < 0 {
			t.Fatalf("no layout figure table:\n%s", s)
		}
		// The value column ends where its header "value" ends.
		end := utf8.RuneCountInString(lines[start][:strings.Index(lines[start], "value")+len("value")])
		rows := 0
		for _, l := range lines[start+1:] {
			if l == "" {
				break
			}
			rows++
			f := strings.Fields(l)
			// The value is the last field before the interval ("–" or "[lo, hi]"), or the last field.
			k := len(f) - 1
			if strings.HasSuffix(f[k], "]") {
				k -= 2
			} else if f[k] == "–" {
				k--
			}
			v := f[k]
			// One number per row: not a range "lo – hi" in the value column.
			if _, err := strconv.ParseFloat(v, 64); err != nil || f[k-1] == "–" {
				t.Errorf("withheld %v: value column of %q is not one number", withheld, l)
			}
			at := strings.Index(l, " "+v) + 1 + len(v)
			if got := utf8.RuneCountInString(l[:at]); got != end {
				t.Errorf("withheld %v: value %q of %q ends at column %d, want %d", withheld, v, l, got, end)
			}
		}
		if rows != 8 {
			t.Errorf("withheld %v: %d layout-wide rows, want 8", withheld, rows)
		}
		for _, want := range []string{"f 5th pct over cells and slots", "f 95th pct over cells and slots", "S0/0"} {
			if !strings.Contains(s, want) {
				t.Errorf("no %q in\n%s", want, s)
			}
		}
	}
}

// TestLayoutHeaderWords: sites, sectors and cells in the singular and
// plural, and a layout without wrap-around.
func TestLayoutHeaderWords(t *testing.T) {
	rep := &pb.RunReport{Layout: &pb.LayoutReport{}, NormalisedScenario: &pb.Scenario{Layout: &pb.Layout{Sites: 1, SectorsPerSite: 1,
		InterSiteDistanceM: 500, Handover: &pb.Handover{WindowDb: 0, MaxActive: 1}}}}
	want := "1 site × 1 sector, inter-site distance 500 m, without wrap-around, handover window 0.0 dB (at most 1 cell in the active set)"
	if got := LayoutHeader(rep); got != want {
		t.Errorf("LayoutHeader = %q, want %q", got, want)
	}
	if got := LayoutHeader(&pb.RunReport{}); got != "" {
		t.Errorf("single-cell LayoutHeader = %q", got)
	}
}

// TestLayoutMapDataGroups: the map data carries each user's group and the
// scenario's group names (the map's legend), and the cell names of the
// per-cell table.
func TestLayoutMapDataGroups(t *testing.T) {
	rep := layoutReport(false)
	rep.NormalisedScenario.Groups = []*pb.UserGroup{{Name: "walkers"}, {}}
	rep.Layout.UserPoints = []*pb.LayoutUserPoint{{XM: 1, YM: 2, Group: 1, OutageProbability: 0.2}, {Group: 0, OutageProbability: 0.05}}
	d, err := LayoutMapData(rep, false)
	if err != nil {
		t.Fatal(err)
	}
	if len(d.GroupNames) != 2 || d.GroupNames[0] != "walkers" || d.GroupNames[1] != "group 1" {
		t.Errorf("group names %q", d.GroupNames)
	}
	if len(d.Users) != 2 || d.Users[0].Group != 1 || d.Users[1].Group != 0 || math.Abs(d.Users[0].Value-20) > 1e-12 {
		t.Errorf("users %+v", d.Users)
	}
	if len(d.Cells) != 1 || d.Cells[0].Name != "S0/0" {
		t.Errorf("cells %+v", d.Cells)
	}
}

package render

import (
	"fmt"
	"io"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// LayoutComputes reports whether the multi-cell engine computes aggregate
// figure key (it has no percentiles or convergence time); tables of a
// layout's reports leave the others out.
func LayoutComputes(key string) bool { return !layoutOnlyMissing[key] }

// layoutOnlyMissing lists the aggregate figures the multi-cell engine does
// not compute; the run table leaves them out for a layout.
var layoutOnlyMissing = map[string]bool{
	"sir_error_p1_db": true, "sir_error_p5_db": true, "sir_error_p50_db": true, "sir_error_p95_db": true, "sir_error_p99_db": true,
	"tx_power_p1_dbm": true, "tx_power_p5_dbm": true, "tx_power_p50_dbm": true, "tx_power_p95_dbm": true, "tx_power_p99_dbm": true,
	"convergence_time_s": true,
}

// layoutCSVFigures are the layout's own figures that a layout run or
// sweep adds to its CSV, by their proto names (LayoutOverall), each with
// its 95 % interval (F, F_ci_low, F_ci_high): other_to_own is f, the
// other-cell / own-cell interference ratio over every cell (linear);
// soft_handover_share the share of user-slots with two or more cells in the
// active set (fraction). The layout's noise rise is in the figure columns
// noise_rise_mean_db and noise_rise_p95_db (mean and 95th percentile over
// cells and slots), not repeated here.
var layoutCSVFigures = []struct {
	key string
	get func(*pb.LayoutOverall) *pb.Estimate
}{
	{"other_to_own", (*pb.LayoutOverall).GetOtherToOwn},
	{"soft_handover_share", (*pb.LayoutOverall).GetSoftHandoverShare},
}

// layoutCSVHeader is the columns of layoutCSVFigures.
func layoutCSVHeader() []string {
	var h []string
	for _, f := range layoutCSVFigures {
		h = append(h, f.key, f.key+"_ci_low", f.key+"_ci_high")
	}
	return h
}

// layoutCSVCells is a layout report's layoutCSVFigures cells; all empty
// without a layout (a single-cell point of a sweep that varies
// layout.sites).
func layoutCSVCells(l *pb.LayoutReport) []string {
	c := make([]string, 0, 3*len(layoutCSVFigures))
	for _, f := range layoutCSVFigures {
		if l == nil {
			c = append(c, "", "", "")
			continue
		}
		e := f.get(l.GetOverall())
		c = append(c, CSVNum(e.GetValue()), CSVNum(e.GetCiLow()), CSVNum(e.GetCiHigh()))
	}
	return c
}

// reportFigureCSVCells is the figure cells of a report's aggregate: those
// the multi-cell engine does not compute (layoutOnlyMissing) are empty for
// a layout report, never 0.
func reportFigureCSVCells(rep *pb.RunReport) []string {
	c := figureCSVCells(rep.GetAggregate())
	if rep.GetLayout() == nil {
		return c
	}
	for i, f := range figures {
		if layoutOnlyMissing[f.Key] {
			c[3*i], c[3*i+1], c[3*i+2] = "", "", ""
		}
	}
	return c
}

// ci is "[lo, hi]" of an estimate scaled and rounded ("–" without one:
// Interval).
func ci(e *pb.Estimate, scale float64, dec int) string {
	return Interval(scale*e.GetCiLow(), scale*e.GetCiHigh(), dec)
}

// LayoutPart is one table of a layout's figures as LayoutParts builds it:
// a title ("" for the first), the column names, the right-aligned columns
// and the rows of formatted cells.
type LayoutPart struct {
	Title string
	Head  []string
	Right []int
	Rows  [][]string
}

// LayoutHeader describes a report's layout in words: "7 sites × 3
// sectors, inter-site distance 750 m, with wrap-around, handover window
// 3.0 dB (at most 3 cells in the active set)"; "" for a single-cell report.
func LayoutHeader(rep *pb.RunReport) string {
	if rep.GetLayout() == nil {
		return ""
	}
	lay := rep.GetNormalisedScenario().GetLayout()
	plural := func(n int32, one string) string {
		if n == 1 {
			return "1 " + one
		}
		return fmt.Sprintf("%d %ss", n, one)
	}
	wrap := "without wrap-around"
	if lay.GetWrapAround() {
		wrap = "with wrap-around"
	}
	return fmt.Sprintf("%s × %s, inter-site distance %s m, %s, handover window %s dB (at most %s in the active set)",
		plural(lay.GetSites(), "site"), plural(lay.GetSectorsPerSite(), "sector"), Num(lay.GetInterSiteDistanceM(), 0), wrap,
		Num(lay.GetHandover().GetWindowDb(), 1), plural(lay.GetHandover().GetMaxActive(), "cell"))
}

// LayoutParts is the multi-cell section of a report as tables, the one
// home of its figures, names, units and decimals (the CLI's LayoutTable
// and the HTML report both draw it): the layout-wide figures with their
// 95 % intervals, the figures by handover state, and one row per cell.
// interval formats an estimate's 95 % interval in the value's scale and
// decimals (the CLI: "[lo, hi]" or "–"). No parts for a single-cell
// report.
func LayoutParts(rep *pb.RunReport, interval func(e *pb.Estimate, scale float64, dec int) string) []LayoutPart {
	l := rep.GetLayout()
	if l == nil {
		return nil
	}
	o := l.GetOverall()
	all := LayoutPart{Head: []string{"layout figure", "value", "95 % interval"}, Right: []int{1}}
	row := func(label string, e *pb.Estimate, scale float64, dec int) {
		all.Rows = append(all.Rows, []string{label, Num(scale*e.GetValue(), dec), interval(e, scale, dec)})
	}
	lrow := func(f LayoutFigure) { row(f.Label, f.Get(o), f.Scale, f.Dec) }
	lrow(LayoutFigureF)
	all.Rows = append(all.Rows,
		[]string{"f 5th pct over cells and slots", Num(o.GetOtherToOwnSpreadP5(), 3), ""},
		[]string{"f 95th pct over cells and slots", Num(o.GetOtherToOwnSpreadP95(), 3), ""})
	fig := func(key string, e *pb.Estimate) { f := MustFigure(key); row(f.Label, e, f.Scale, f.Dec) }
	fig("noise_rise_mean_db", o.GetNoiseRiseDb())
	fig("outage_probability", o.GetOutageProbability())
	lrow(LayoutFigureSoftHandover)
	row("time at max power (%)", o.GetTimeAtMaxPower(), 100, 2)
	row("time at max power, cell edge (%)", o.GetTimeAtMaxEdge(), 100, 2)

	legs := LayoutPart{Title: "by handover state: cells in the active set (legs)",
		Head:  []string{"cells", "share (%)", "95 % interval", "outage (%)", "95 % interval", "time at max power (%)", "95 % interval"},
		Right: []int{1, 2, 3, 4, 5, 6}}
	// The engine's last state is "3 or more cells": exactly 3 when at
	// most 3 may be active; states above max_active cannot occur.
	maxActive := rep.GetNormalisedScenario().GetLayout().GetHandover().GetMaxActive()
	if maxActive <= 0 {
		maxActive = 3 // the proto's default for 0
	}
	for i, name := range []string{"1", "2", LegStateName(2, maxActive)} {
		if i >= len(o.GetLegShare()) || int32(i) >= maxActive {
			break
		}
		s, out := o.GetLegShare()[i], o.GetOutageByLegs()[i]
		mx := &pb.Estimate{}
		if i < len(o.GetTimeAtMaxByLegs()) {
			mx = o.GetTimeAtMaxByLegs()[i]
		}
		if s.GetValue() == 0 {
			legs.Rows = append(legs.Rows, []string{name, Num(0, 1), interval(s, 100, 1), "–", "", "–", ""})
			continue
		}
		legs.Rows = append(legs.Rows, []string{name, Num(100*s.GetValue(), 1), interval(s, 100, 1),
			Num(100*out.GetValue(), 2), interval(out, 100, 2), Num(100*mx.GetValue(), 2), interval(mx, 100, 2)})
	}

	cells := LayoutPart{Title: "per cell",
		Head:  []string{"cell", "mean served users", "f", "95 % interval", "f median", "f 95th pct", "noise rise (dB)", "95 % interval", "noise rise 95th pct (dB)"},
		Right: []int{1, 2, 3, 4, 5, 6, 7, 8}}
	for _, c := range l.GetCells() {
		cells.Rows = append(cells.Rows, []string{c.GetName(), Num(c.GetServedUsers(), 1),
			Num(c.GetOtherToOwn().GetValue(), 3), interval(c.GetOtherToOwn(), 1, 3),
			Num(c.GetOtherToOwnP50(), 3), Num(c.GetOtherToOwnP95(), 3),
			Num(c.GetNoiseRiseDb().GetValue(), 2), interval(c.GetNoiseRiseDb(), 1, 2), Num(c.GetNoiseRiseP95Db(), 2)})
	}
	return []LayoutPart{all, legs, cells}
}

// LegStateName is the name of handover state i (0-based) of the layout
// report's by-legs lists (1, 2, then 3 or more cells in the active set)
// when at most maxActive cells may be active: "3" when maxActive is 3,
// "3–6" when it is 6.
func LegStateName(i int, maxActive int32) string {
	if i < 2 || maxActive <= 3 {
		return fmt.Sprint(i + 1)
	}
	return fmt.Sprintf("3–%d", maxActive)
}

// LayoutFigure is a layout-wide figure (LayoutOverall) as the tables show
// it: its column name, display scale and decimals.
type LayoutFigure struct {
	Label string
	Scale float64
	Dec   int
	Get   func(*pb.LayoutOverall) *pb.Estimate
}

// The layout figures that the run's layout table and a layout sweep's or
// tune's tables share, with one name each: f, the other-cell / own-cell
// interference ratio over every cell (linear, 3 decimals), and the
// soft-handover share, user-slots with two or more cells in the active
// set (%, 1 decimal).
var (
	LayoutFigureF            = LayoutFigure{"f", 1, 3, (*pb.LayoutOverall).GetOtherToOwn}
	LayoutFigureSoftHandover = LayoutFigure{"soft-handover share (%)", 100, 1, (*pb.LayoutOverall).GetSoftHandoverShare}
	LayoutSweepFigures       = []LayoutFigure{LayoutFigureF, LayoutFigureSoftHandover}
)

// Cell is the figure of a layout report as "value [low, high]" (the value
// alone without an interval), "–" for a single-cell report.
func (f LayoutFigure) Cell(rep *pb.RunReport) string {
	if rep.GetLayout() == nil {
		return "–"
	}
	return cell(Figure{Scale: f.Scale, Dec: f.Dec}, f.Get(rep.GetLayout().GetOverall()))
}

// CandidatesHaveF reports whether any of a tune condition's candidates
// carries f (TuneFigures.other_to_own: multi-cell mode); its candidate
// table then has an f column.
func CandidatesHaveF(crs []*pb.CandidateResult) bool {
	for _, cr := range crs {
		if cr.GetFigures().GetOtherToOwn() != nil {
			return true
		}
	}
	return false
}

// CandidateFCell is a tune candidate's f with its interval over
// replications, in the run table's decimals ("–" without f).
func CandidateFCell(cr *pb.CandidateResult) string {
	return estCell(cr.GetFigures().GetOtherToOwn(), LayoutFigureF.Scale, LayoutFigureF.Dec)
}

// LayoutFNote names f once with its field in the JSON and CSV: every table
// of a layout says f after it.
const LayoutFNote = "f (other_to_own in the JSON and CSV): " + layoutFMeaning

// TuneFNote names f under a tune's candidate tables: the Recommendation's
// JSON has it per candidate (figures.other_to_own), the tune CSV does not.
const TuneFNote = "f (figures.other_to_own in the JSON, not in the CSV): " + layoutFMeaning

// layoutFMeaning is what f is, in every note that names it.
const layoutFMeaning = "other-cell / own-cell interference received at a cell (linear)"

// IsCautionNote reports whether note n is the engine's caution about real
// transmitters (the multi-cell engine adds one to its notes); a page that
// shows its own caution leaves it out.
func IsCautionNote(n string) bool {
	return strings.Contains(strings.ToLower(n), "do not replace the operator")
}

// LayoutTable prints the multi-cell section of a report (LayoutParts);
// RunTable prints the caution about real transmitters once at its end
// (and leaves the engine's caution note out of the notes it prints).
func LayoutTable(w io.Writer, rep *pb.RunReport) {
	parts := LayoutParts(rep, ci)
	if parts == nil {
		return
	}
	fmt.Fprintln(w)
	fmt.Fprintln(w, "layout: "+LayoutHeader(rep))
	fmt.Fprintln(w, LayoutFNote)
	for i, p := range parts {
		if i > 0 {
			fmt.Fprintln(w)
			fmt.Fprintln(w, p.Title+":")
		}
		t := NewTable(p.Head...).AlignRight(p.Right...)
		for _, r := range p.Rows {
			t.Add(r...)
		}
		t.Write(w)
	}
}

// writeCaution closes every CLI run and sweep table, once per output,
// with the one wording of the caution about real transmitters
// (loop.Caution), wrapped at 78 columns after an empty line.
func writeCaution(w io.Writer) {
	fmt.Fprintf(w, "\n%s\n", Wrap(loop.Caution, 78, ""))
}

// LayoutMapData is the map of a multi-cell report for plots.LayoutMap:
// the cells with their names, sites and boresights, the group names, and
// every user of replication 0 with its group, coloured by its outage in %
// (power false) or its mean Tx power in dBm.
func LayoutMapData(rep *pb.RunReport, power bool) (plots.LayoutMapData, error) {
	l := rep.GetLayout()
	if l == nil {
		return plots.LayoutMapData{}, fmt.Errorf("a map needs a multi-cell scenario (layout.sites set)")
	}
	d := plots.LayoutMapData{InterSiteDistanceM: rep.GetNormalisedScenario().GetLayout().GetInterSiteDistanceM()}
	sectors := rep.GetNormalisedScenario().GetLayout().GetSectorsPerSite() == 3
	for _, c := range l.GetCells() {
		d.Cells = append(d.Cells, plots.MapCell{Name: c.GetName(), SiteXM: c.GetSiteXM(), SiteYM: c.GetSiteYM(),
			Sector: sectors, BoresightDeg: c.GetBoresightDeg()})
	}
	f := MustFigure("outage_probability")
	if power {
		f = MustFigure("tx_power_mean_dbm")
	}
	d.ValueLabel = f.Label
	for i, g := range rep.GetNormalisedScenario().GetGroups() {
		name := g.GetName()
		if name == "" {
			name = fmt.Sprintf("group %d", i)
		}
		d.GroupNames = append(d.GroupNames, name)
	}
	for _, u := range l.GetUserPoints() {
		v := f.Scale * u.GetOutageProbability()
		if power {
			v = f.Scale * u.GetTxPowerMeanDbm()
		}
		d.Users = append(d.Users, plots.MapUser{XM: u.GetXM(), YM: u.GetYM(), Group: int(u.GetGroup()), Value: v})
	}
	return d, nil
}

// AxisTitle is an axis label with its unit from a field path:
// "layout.handover.window_db" → "window (dB)".
func AxisTitle(path string) string {
	short := path[strings.LastIndexByte(path, '.')+1:]
	for _, u := range []struct{ suf, unit string }{{"_dbm", "dBm"}, {"_db", "dB"}, {"_hz", "Hz"}, {"_kmh", "km/h"}, {"_slots", "slots"}, {"_m", "m"}, {"_s", "s"}} {
		if strings.HasSuffix(short, u.suf) {
			return strings.ReplaceAll(strings.TrimSuffix(short, u.suf), "_", " ") + " (" + u.unit + ")"
		}
	}
	return strings.ReplaceAll(short, "_", " ")
}

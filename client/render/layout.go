package render

import (
	"fmt"
	"io"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
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

// LayoutTable prints the multi-cell section of a report: the
// layout-wide figures with their 95 % intervals, the figures by handover
// state, and one row per cell.
func LayoutTable(w io.Writer, rep *pb.RunReport) {
	l := rep.GetLayout()
	if l == nil {
		return
	}
	lay := rep.GetNormalisedScenario().GetLayout()
	o := l.GetOverall()
	fmt.Fprintln(w)
	fmt.Fprintf(w, "layout: %d sites × %d sector(s), inter-site distance %s m, wrap-around %v, handover window %s dB (max %d cells)\n",
		lay.GetSites(), lay.GetSectorsPerSite(), Num(lay.GetInterSiteDistanceM(), 0), lay.GetWrapAround(),
		Num(lay.GetHandover().GetWindowDb(), 1), lay.GetHandover().GetMaxActive())
	t := NewTable("layout figure", "value", "95 % CI").AlignRight(1)
	row := func(label string, e *pb.Estimate, scale float64, dec int) {
		t.Add(label, Num(scale*e.GetValue(), dec), ci(e, scale, dec))
	}
	row("other-cell / own-cell interference f", o.GetOtherToOwn(), 1, 3)
	t.Add("f 5th–95th pct over cells and slots", Num(o.GetOtherToOwnSpreadP5(), 3)+" – "+Num(o.GetOtherToOwnSpreadP95(), 3), "")
	fig := func(key string, e *pb.Estimate) { f := MustFigure(key); row(f.Label, e, f.Scale, f.Dec) }
	fig("noise_rise_mean_db", o.GetNoiseRiseDb())
	fig("outage_probability", o.GetOutageProbability())
	row("soft-handover share (%)", o.GetSoftHandoverShare(), 100, 1)
	row("time at max power (%)", o.GetTimeAtMaxPower(), 100, 2)
	row("time at max power, cell edge (%)", o.GetTimeAtMaxEdge(), 100, 2)
	t.Write(w)

	fmt.Fprintln(w)
	fmt.Fprintln(w, "by handover state (cells in the active set):")
	ht := NewTable("cells", "share (%)", "95 % CI", "outage (%)", "95 % CI", "at max power (%)", "95 % CI").AlignRight(1, 2, 3, 4, 5, 6)
	for i, name := range []string{"1", "2", "3+"} {
		if i >= len(o.GetLegShare()) {
			break
		}
		s, out := o.GetLegShare()[i], o.GetOutageByLegs()[i]
		mx := &pb.Estimate{}
		if i < len(o.GetTimeAtMaxByLegs()) {
			mx = o.GetTimeAtMaxByLegs()[i]
		}
		if s.GetValue() == 0 {
			ht.Add(name, Num(0, 1), ci(s, 100, 1), "–", "", "–", "")
			continue
		}
		ht.Add(name, Num(100*s.GetValue(), 1), ci(s, 100, 1), Num(100*out.GetValue(), 2), ci(out, 100, 2),
			Num(100*mx.GetValue(), 2), ci(mx, 100, 2))
	}
	ht.Write(w)

	fmt.Fprintln(w)
	fmt.Fprintln(w, "per cell:")
	ct := NewTable("cell", "served users", "f", "95 % CI", "f median", "f 95th pct", "noise rise (dB)", "95 % CI", "noise rise 95th pct (dB)").AlignRight(1, 2, 3, 4, 5, 6, 7, 8)
	for _, c := range l.GetCells() {
		ct.Add(c.GetName(), Num(c.GetServedUsers(), 1), Num(c.GetOtherToOwn().GetValue(), 3), ci(c.GetOtherToOwn(), 1, 3),
			Num(c.GetOtherToOwnP50(), 3), Num(c.GetOtherToOwnP95(), 3),
			Num(c.GetNoiseRiseDb().GetValue(), 2), ci(c.GetNoiseRiseDb(), 1, 2), Num(c.GetNoiseRiseP95Db(), 2))
	}
	ct.Write(w)
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Simulated settings do not replace the operator's planning, regulatory limits on power and exposure, and licensed practice.")
}

// LayoutMapData is the map of a multi-cell report for plots.LayoutMap:
// the cells with their sites and boresights and every user of replication
// 0 coloured by its outage in % (power false) or its mean Tx power in dBm.
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
	for _, u := range l.GetUserPoints() {
		v := f.Scale * u.GetOutageProbability()
		if power {
			v = f.Scale * u.GetTxPowerMeanDbm()
		}
		d.Users = append(d.Users, plots.MapUser{XM: u.GetXM(), YM: u.GetYM(), Value: v})
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

package main

import (
	_ "embed"
	"fmt"
	"io"
	"sort"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/client/plots"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// multiCellScenarioYAML is the commented multi-cell example scenario
// (`fadeloop example --multi-cell`); testdata/scenarios/harbour_town.json is
// its protojson form.
//
//go:embed multicell.yaml
var multiCellScenarioYAML []byte

// multiCellScenarioName names it in messages.
const multiCellScenarioName = "built-in multi-cell example"

// layoutOnlyMissing lists the aggregate figures the multi-cell engine does
// not compute; the run table leaves them out for a layout.
var layoutOnlyMissing = map[string]bool{
	"sir_error_p1_db": true, "sir_error_p5_db": true, "sir_error_p50_db": true, "sir_error_p95_db": true, "sir_error_p99_db": true,
	"tx_power_p1_dbm": true, "tx_power_p5_dbm": true, "tx_power_p50_dbm": true, "tx_power_p95_dbm": true, "tx_power_p99_dbm": true,
	"convergence_time_s": true,
}

// ci is "[lo, hi]" of an estimate scaled and rounded.
func ci(e *pb.Estimate, scale float64, dec int) string {
	return "[" + num(scale*e.GetCiLow(), dec) + ", " + num(scale*e.GetCiHigh(), dec) + "]"
}

// writeLayoutTable prints the multi-cell section of a report: the
// layout-wide figures with their 95 % intervals, the figures by handover
// state, and one row per cell.
func writeLayoutTable(w io.Writer, rep *pb.RunReport) {
	l := rep.GetLayout()
	if l == nil {
		return
	}
	lay := rep.GetNormalisedScenario().GetLayout()
	o := l.GetOverall()
	fmt.Fprintln(w)
	fmt.Fprintf(w, "layout: %d sites × %d sector(s), inter-site distance %s m, wrap-around %v, handover window %s dB (max %d cells)\n",
		lay.GetSites(), lay.GetSectorsPerSite(), num(lay.GetInterSiteDistanceM(), 0), lay.GetWrapAround(),
		num(lay.GetHandover().GetWindowDb(), 1), lay.GetHandover().GetMaxActive())
	t := newTable("layout figure", "value", "95 % CI").alignRight(1)
	row := func(label string, e *pb.Estimate, scale float64, dec int) {
		t.add(label, num(scale*e.GetValue(), dec), ci(e, scale, dec))
	}
	row("other-cell / own-cell interference f", o.GetOtherToOwn(), 1, 3)
	t.add("f 5th–95th pct over cells and slots", num(o.GetOtherToOwnSpreadP5(), 3)+" – "+num(o.GetOtherToOwnSpreadP95(), 3), "")
	row("noise rise mean (dB)", o.GetNoiseRiseDb(), 1, 2)
	row("outage (%)", o.GetOutageProbability(), 100, 2)
	row("soft-handover share (%)", o.GetSoftHandoverShare(), 100, 1)
	row("time at max power (%)", o.GetTimeAtMaxPower(), 100, 2)
	row("time at max power, cell edge (%)", o.GetTimeAtMaxEdge(), 100, 2)
	t.write(w)

	fmt.Fprintln(w)
	fmt.Fprintln(w, "by handover state (cells in the active set):")
	ht := newTable("cells", "share (%)", "95 % CI", "outage (%)", "95 % CI", "at max power (%)", "95 % CI").alignRight(1, 2, 3, 4, 5, 6)
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
			ht.add(name, num(0, 1), ci(s, 100, 1), "–", "", "–", "")
			continue
		}
		ht.add(name, num(100*s.GetValue(), 1), ci(s, 100, 1), num(100*out.GetValue(), 2), ci(out, 100, 2),
			num(100*mx.GetValue(), 2), ci(mx, 100, 2))
	}
	ht.write(w)

	fmt.Fprintln(w)
	fmt.Fprintln(w, "per cell:")
	ct := newTable("cell", "served users", "f", "95 % CI", "f median", "f 95th pct", "noise rise (dB)", "95 % CI", "noise rise 95th pct (dB)").alignRight(1, 2, 3, 4, 5, 6, 7, 8)
	for _, c := range l.GetCells() {
		ct.add(c.GetName(), num(c.GetServedUsers(), 1), num(c.GetOtherToOwn().GetValue(), 3), ci(c.GetOtherToOwn(), 1, 3),
			num(c.GetOtherToOwnP50(), 3), num(c.GetOtherToOwnP95(), 3),
			num(c.GetNoiseRiseDb().GetValue(), 2), ci(c.GetNoiseRiseDb(), 1, 2), num(c.GetNoiseRiseP95Db(), 2))
	}
	ct.write(w)
	fmt.Fprintln(w)
	fmt.Fprintln(w, "Simulated settings do not replace the operator's planning, regulatory limits on power and exposure, and licensed practice.")
}

// layoutMap draws the map of a multi-cell report: users coloured by their
// outage (kind "map") or mean Tx power ("map-power").
func layoutMap(title, kind string, rep *pb.RunReport) (*plots.Figure, error) {
	l := rep.GetLayout()
	if l == nil {
		return nil, fmt.Errorf("--plot %s needs a multi-cell scenario (layout.sites set)", kind)
	}
	d := plots.LayoutMapData{InterSiteDistanceM: rep.GetNormalisedScenario().GetLayout().GetInterSiteDistanceM()}
	sectors := rep.GetNormalisedScenario().GetLayout().GetSectorsPerSite() == 3
	for _, c := range l.GetCells() {
		d.Cells = append(d.Cells, plots.MapCell{Name: c.GetName(), SiteXM: c.GetSiteXM(), SiteYM: c.GetSiteYM(),
			Sector: sectors, BoresightDeg: c.GetBoresightDeg()})
	}
	power := kind == "map-power"
	d.ValueLabel = "outage (%)"
	if power {
		d.ValueLabel = "mean Tx power (dBm)"
	}
	for _, u := range l.GetUserPoints() {
		v := 100 * u.GetOutageProbability()
		if power {
			v = u.GetTxPowerMeanDbm()
		}
		d.Users = append(d.Users, plots.MapUser{XM: u.GetXM(), YM: u.GetYM(), Value: v})
	}
	what := "outage"
	if power {
		what = "Tx power"
	}
	return plots.LayoutMap(title+" — users by "+what+" (replication 0, "+strconv.Itoa(len(d.Users))+" users)", d)
}

// layoutSweepFigure draws f and the outage of a multi-cell sweep against
// its first axis, one line per value of the second.
func layoutSweepFigure(title string, axes []*pb.SweepAxis, pts []*pb.SweepPoint) (*plots.Figure, error) {
	if len(axes) < 1 || len(axes) > 2 {
		return nil, badInputf("a layout plot needs one or two axes")
	}
	lines := map[float64]*plots.LayoutLine{}
	var order []float64
	for _, p := range pts {
		l := p.GetReport().GetLayout()
		if l == nil {
			return nil, badInputf("--plot layout needs a multi-cell scenario (layout.sites set)")
		}
		c := p.GetCoordinates()
		key, label := 0.0, "all"
		if len(axes) == 2 {
			key, label = c[1], axisLabel(axes[1], c[1])
		}
		ln := lines[key]
		if ln == nil {
			ln = &plots.LayoutLine{Label: label}
			lines[key] = ln
			order = append(order, key)
		}
		f, o := l.GetOverall().GetOtherToOwn(), l.GetOverall().GetOutageProbability()
		ln.X = append(ln.X, c[0])
		ln.F, ln.FLow, ln.FHigh = append(ln.F, f.GetValue()), append(ln.FLow, f.GetCiLow()), append(ln.FHigh, f.GetCiHigh())
		ln.OutagePct = append(ln.OutagePct, 100*o.GetValue())
		ln.OutageLow = append(ln.OutageLow, 100*o.GetCiLow())
		ln.OutageHigh = append(ln.OutageHigh, 100*o.GetCiHigh())
	}
	sort.Float64s(order)
	var ls []plots.LayoutLine
	for _, k := range order {
		ls = append(ls, *lines[k])
	}
	x := axes[0].GetPath()
	return plots.LayoutSweep("Multi-cell figures against "+x+" — "+title, axisTitle(x), ls)
}

// axisTitle is an axis label with its unit from a field path:
// "layout.handover.window_db" → "window (dB)".
func axisTitle(path string) string {
	short := path[strings.LastIndexByte(path, '.')+1:]
	for _, u := range []struct{ suf, unit string }{{"_dbm", "dBm"}, {"_db", "dB"}, {"_hz", "Hz"}, {"_kmh", "km/h"}, {"_slots", "slots"}, {"_m", "m"}, {"_s", "s"}} {
		if strings.HasSuffix(short, u.suf) {
			return strings.ReplaceAll(strings.TrimSuffix(short, u.suf), "_", " ") + " (" + u.unit + ")"
		}
	}
	return strings.ReplaceAll(short, "_", " ")
}

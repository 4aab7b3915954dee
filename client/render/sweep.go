package render

import (
	"encoding/csv"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"strconv"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// SweepTable writes one row per sweep point: index, axis values and the main
// figures with their intervals as [low, high].
func SweepTable(w io.Writer, req *pb.SweepRequest, pts []*pb.SweepPoint, sum *pb.SweepSummary) {
	if n := req.GetBase().GetName(); n != "" {
		fmt.Fprintln(w, n)
	}
	if sum != nil {
		// A resumed job shows points stored by an earlier run beside the
		// ones computed now; the work and rate are this run's.
		shown, computed := int64(len(pts)), sum.GetPointsComputed()
		count := fmt.Sprintf("%d of %s", computed, Count(int(sum.GetGridPoints()), "grid point", "grid points"))
		if shown > computed {
			count = fmt.Sprintf("%d of %d grid points (%d stored earlier, %d computed now)", shown, sum.GetGridPoints(), shown-computed, computed)
		}
		fmt.Fprintf(w, "%s, %s user-slots in %.2f s (%s)\n\n", count,
			GroupDigits(sum.GetSimulatedUserSlots()), sum.GetWallTimeS(), FmtRate(sum.GetUserSlotsPerS(), "user-slots/s"))
	}
	h := []string{"point"}
	for _, a := range req.GetAxes() {
		h = append(h, a.GetPath())
	}
	for _, k := range SweepTableFigures {
		h = append(h, shortLabel(k))
	}
	// A layout's own figures (f and the soft-handover share, named as in
	// the run's layout table) follow the single-cell ones.
	layout := sweepHasLayout(pts)
	if layout {
		for _, f := range LayoutSweepFigures {
			h = append(h, f.Label)
		}
	}
	h = append(h, "load")
	t := NewTable(h...)
	for i := 0; i < len(h)-1; i++ {
		t.AlignRight(i)
	}
	noLoad := false
	var withheld *pb.SweepPoint // the first point with a value shown without its interval
	for _, p := range pts {
		row := []string{strconv.FormatInt(p.GetIndex(), 10)}
		for i, c := range p.GetCoordinates() {
			row = append(row, coordinateText(p, i, c, func(x float64) string { return strconv.FormatFloat(x, 'g', 6, 64) }))
		}
		unsimulated := notSimulated(p.GetReport())
		for _, k := range SweepTableFigures {
			f, _ := FigureByKey(k)
			if unsimulated {
				row = append(row, "—") // infeasible load: not run, no figure
				continue
			}
			e := f.Get(p.GetReport().GetAggregate())
			row = append(row, cell(f, e))
			if e != nil && withheld == nil && (math.IsNaN(e.GetCiLow()) || math.IsNaN(e.GetCiHigh())) {
				withheld = p
			}
		}
		if layout {
			for _, f := range LayoutSweepFigures {
				row = append(row, f.Cell(p.GetReport()))
			}
		}
		load := "ok"
		switch {
		case p.GetReport().GetLayout() != nil:
			load = "–" // the multi-cell engine computes no feasibility
			noLoad = true
		case p.GetReport().GetFeasibility().GetInfeasible():
			load = "INFEASIBLE"
		}
		t.Add(append(row, load)...)
	}
	t.Write(w)
	if layout {
		fmt.Fprintln(w, LayoutFNote)
	}
	if noLoad {
		fmt.Fprintln(w, "load –: feasibility is not computed in multi-cell mode")
	}
	if withheld != nil {
		// Values without an interval (e.g. one replication of a layout
		// too short for one): the first such point's notes say why.
		fmt.Fprintf(w, "values without an interval: it is withheld; point %d's notes:\n", withheld.GetIndex())
		for _, n := range withheld.GetReport().GetNotes() {
			if !IsCautionNote(n) {
				fmt.Fprintln(w, Wrap("- "+GroupNumbersIn(n, " "), 78, "  "))
			}
		}
	}
	// The caution about real transmitters, once for the whole table (the
	// points' own caution notes are left out above).
	writeCaution(w)
}

// sweepHasLayout reports whether any of the points ran on the multi-cell
// engine (its table then has the layout's columns).
func sweepHasLayout(pts []*pb.SweepPoint) bool {
	for _, p := range pts {
		if p.GetReport().GetLayout() != nil {
			return true
		}
	}
	return false
}

// sweepCSVHeader is the header of `sweep --format csv`; layout adds the
// layout's own figures (layoutCSVFigures) at the end.
func sweepCSVHeader(axes []*pb.SweepAxis, layout bool) []string {
	h := []string{"index", "seed"}
	for _, a := range axes {
		h = append(h, a.GetPath())
	}
	h = append(h, "feasible", "users", "user_slots")
	h = append(h, figureCSVHeader()...)
	if layout {
		h = append(h, layoutCSVHeader()...)
	}
	return h
}

// SweepIsLayout reports whether a sweep's points may run on the multi-cell
// engine (the base has layout.sites set, or an axis varies it): its CSV
// then has the layout columns.
func SweepIsLayout(req *pb.SweepRequest) bool {
	if req.GetBase().GetLayout().GetSites() != 0 {
		return true
	}
	for _, a := range req.GetAxes() {
		if a.GetPath() == "layout.sites" {
			return true
		}
	}
	return false
}

// SweepCSV writes one row per sweep point under sweepCSVHeader (layout:
// SweepIsLayout of the request). A figure that was not computed has empty
// cells, never 0: every figure of a load infeasible before the run, and
// on a layout point the percentiles, the convergence time and feasible
// (the multi-cell engine computes no feasibility).
func SweepCSV(w io.Writer, axes []*pb.SweepAxis, pts []*pb.SweepPoint, layout bool) error {
	cw := csv.NewWriter(w)
	cw.Write(sweepCSVHeader(axes, layout))
	for _, p := range pts {
		rep := p.GetReport()
		agg := rep.GetAggregate()
		row := []string{strconv.FormatInt(p.GetIndex(), 10), strconv.FormatUint(p.GetSeed(), 10)}
		for i, c := range p.GetCoordinates() {
			row = append(row, coordinateText(p, i, c, CSVNum))
		}
		feasible := strconv.FormatBool(!rep.GetFeasibility().GetInfeasible())
		if rep.GetLayout() != nil {
			feasible = "" // not computed in multi-cell mode
		}
		row = append(row, feasible, strconv.Itoa(int(agg.GetUsers())), strconv.FormatInt(agg.GetUserSlots(), 10))
		if notSimulated(rep) {
			row = append(row, make([]string, len(figureCSVHeader()))...) // infeasible load: empty cells, not zeros
		} else {
			row = append(row, reportFigureCSVCells(rep)...)
		}
		if layout {
			row = append(row, layoutCSVCells(rep.GetLayout())...)
		}
		cw.Write(row)
	}
	cw.Flush()
	return cw.Error()
}

// SweepJSON writes {"axes", "points", "summary"} in protojson with proto
// field names.
func SweepJSON(w io.Writer, axes []*pb.SweepAxis, pts []*pb.SweepPoint, sum *pb.SweepSummary) error {
	doc := struct {
		Axes    []json.RawMessage `json:"axes"`
		Points  []json.RawMessage `json:"points"`
		Summary json.RawMessage   `json:"summary,omitempty"`
	}{Axes: []json.RawMessage{}, Points: []json.RawMessage{}}
	for _, a := range axes {
		b, err := compactJSON(a)
		if err != nil {
			return err
		}
		doc.Axes = append(doc.Axes, b)
	}
	for _, p := range pts {
		b, err := compactJSON(p)
		if err != nil {
			return err
		}
		doc.Points = append(doc.Points, b)
	}
	if sum != nil {
		b, err := compactJSON(sum)
		if err != nil {
			return err
		}
		doc.Summary = b
	}
	raw, err := json.Marshal(doc)
	if err != nil {
		return err
	}
	b, err := indentJSON(raw)
	if err != nil {
		return err
	}
	_, err = w.Write(b)
	return err
}

// coordinateText is point p's value on axis i: the name on a names axis
// (e.g. COMMAND_ADAPTIVE), else the number c formatted by num.
func coordinateText(p *pb.SweepPoint, i int, c float64, num func(float64) string) string {
	if names := p.GetCoordinateNames(); i < len(names) && names[i] != "" {
		return names[i]
	}
	return num(c)
}

// notSimulated reports a load found infeasible before the run: the report
// has no figures (every figure would read 0).
func notSimulated(rep *pb.RunReport) bool {
	return rep.GetFeasibility().GetInfeasible() && rep.GetSimulatedUserSlots() == 0
}

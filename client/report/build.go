package report

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"slices"
	"strings"

	"google.golang.org/protobuf/encoding/protojson"

	clirender "github.com/fadeloop/fadeloop/client/render"
	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// doc is what the page template renders.
type doc struct {
	Title     string
	Kind      string // "run", "sweep", "tune", "capacity"
	KindLabel string
	Created   string
	Source    string
	Verdict   verdict
	Sections  []section
	Scenario  scenarioView
	Repro     [][2]string
	Caution   string
}

// verdict is the answer, shown first: a headline, a status class for the
// colour of its box ("ok", "warn", "bad") and supporting lines.
type verdict struct {
	Headline string
	Class    string
	Lines    []string
}

type section struct {
	ID, Heading string
	Intro       []string // notes shown before the tables
	Notes       []string
	Tables      []table
	Figures     []figure
}

// table is a caption, a header and rows of cells; Num marks the columns
// whose cells are right-aligned numbers; Mark marks highlighted rows.
type table struct {
	Caption string
	Head    []string
	Rows    [][]string
	Num     []bool
	Mark    []bool
	// Path marks the columns whose head is a scenario field path (a sweep
	// axis): it is set in monospace on one line, never broken inside the
	// path, and copies back as typed.
	Path []bool
}

// HeadClass is the class attribute of head cell i: "n" for a numeric
// column, "path" for a field path, both, or "".
func (t table) HeadClass(i int) string {
	var c []string
	if i < len(t.Num) && t.Num[i] {
		c = append(c, "n")
	}
	if i < len(t.Path) && t.Path[i] {
		c = append(c, "path")
	}
	return strings.Join(c, " ")
}

func (t *table) add(mark bool, cells ...string) {
	t.Rows = append(t.Rows, cells)
	t.Mark = append(t.Mark, mark)
}

type scenarioView struct {
	Note string
	Rows [][2]string // field path, value
	JSON string
}

// estimate is "v [lo, hi]" scaled; "–" when absent; the value alone when
// its interval is not available (NaN bounds).
func estimate(e *pb.Estimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	if noInterval(e) {
		return num(scale*e.GetValue(), dec)
	}
	return num(scale*e.GetValue(), dec) + " [" + num(scale*e.GetCiLow(), dec) + ",\u00a0" + num(scale*e.GetCiHigh(), dec) + "]"
}

// noInterval reports an estimate without an interval (a NaN bound: e.g.
// one replication of a layout too short for one; the report's notes say
// why).
func noInterval(e *pb.Estimate) bool {
	return math.IsNaN(e.GetCiLow()) || math.IsNaN(e.GetCiHigh())
}

// interval is an estimate's 95 % interval "[lo, hi]" scaled, or "(no
// interval)" without one (the report's notes say why).
func interval(e *pb.Estimate, scale float64, dec int) string {
	if noInterval(e) {
		return "(no interval)"
	}
	return "[" + num(scale*e.GetCiLow(), dec) + ",\u00a0" + num(scale*e.GetCiHigh(), dec) + "]"
}

// pctCI is "v unit [lo, hi]" of an estimate scaled, or "v unit (no
// interval)" without one.
func pctCI(e *pb.Estimate, scale float64, dec int, unit string) string {
	if noInterval(e) {
		return num(scale*e.GetValue(), dec) + " " + unit + " (no interval)"
	}
	return fmt.Sprintf("%s %s [%s, %s]", num(scale*e.GetValue(), dec), unit, num(scale*e.GetCiLow(), dec), num(scale*e.GetCiHigh(), dec))
}

// repEstimate is "mean [low, high]" scaled; the mean alone below 2 replications.
func repEstimate(e *pb.ReplicationEstimate, scale float64, dec int) string {
	if e == nil {
		return "–"
	}
	if e.GetN() < 2 {
		return num(scale*e.GetMean(), dec)
	}
	return num(scale*e.GetMean(), dec) + " [" + num(scale*e.GetLow(), dec) + ",\u00a0" + num(scale*e.GetHigh(), dec) + "]"
}

func numCols(n int, from ...int) []bool {
	v := make([]bool, n)
	for _, i := range from {
		if i < n {
			v[i] = true
		}
	}
	return v
}

func rangeFrom(a, b int) []int {
	var v []int
	for i := a; i < b; i++ {
		v = append(v, i)
	}
	return v
}

// plural is one or many by the count n (written beside it with thousands).
func plural[N int32 | int64](n N, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// thousands groups digits with narrow no-break spaces: 90 000.
func thousands(n int64) string { return clirender.GroupDigitsSep(n, "\u202f") }

func build(in Input) (*doc, error) {
	kind, err := in.kind()
	if err != nil {
		return nil, err
	}
	d := &doc{Kind: kind, Caution: loop.Caution, Source: in.Source} // printed once on every report
	if !in.Created.IsZero() {
		d.Created = in.Created.UTC().Format("2006-01-02 15:04 UTC")
	}
	var sc *pb.Scenario
	switch kind {
	case "run":
		d.KindLabel = "Simulation run"
		sc = in.Run.GetNormalisedScenario()
		d.Scenario.Note = "The normalised scenario the engine ran (defaults filled in)."
		err = buildRun(d, in.Run)
	case "sweep":
		d.KindLabel = "Sweep"
		sc = in.Sweep.Base
		d.Scenario.Note = "The base scenario of the sweep."
		if sc == nil {
			pts := sortedPoints(in.Sweep.Points)
			if len(pts) > 0 && pts[0].GetReport().GetNormalisedScenario() != nil {
				sc = pts[0].GetReport().GetNormalisedScenario()
				d.Scenario.Note = fmt.Sprintf("The normalised scenario of grid point %d (%s); the other points differ only on the swept axes.",
					pts[0].GetIndex(), coordText(in.Sweep.Axes, pts[0].GetCoordinates()))
			}
		}
		err = buildSweep(d, in.Sweep, in.EngineVersion)
	case "tune":
		d.KindLabel = "Tuning recommendation"
		sc = in.TuneRequest.GetBase()
		d.Scenario.Note = "The base scenario every candidate starts from."
		err = buildTune(d, in.Tune, in.TuneRequest, in.EngineVersion)
	case "capacity":
		d.KindLabel = "Capacity search"
		sc = in.CapacityRequest.GetBase()
		d.Scenario.Note = "The base scenario of the capacity search."
		err = buildCapacity(d, in.Capacity, in.CapacityRequest, in.EngineVersion)
	}
	if err != nil {
		return nil, err
	}
	if sc == nil && in.Scenario != nil {
		sc = in.Scenario
		d.Scenario.Note = "The scenario supplied with the result."
	}
	if sc == nil {
		d.Scenario.Note = "This result does not carry its scenario (sweep, tune and capacity results written with --format json do not); keep the scenario file beside it, or give it when writing the report."
	} else {
		if err := fillScenario(&d.Scenario, sc); err != nil {
			return nil, err
		}
		// A search sets its own replications; the row shows what ran.
		switch kind {
		case "capacity":
			usedReplications(&d.Scenario, capacityReplications(in.CapacityRequest))
		case "tune":
			usedReplications(&d.Scenario, tuneReplications(in.Tune, in.TuneRequest))
		}
	}
	d.Title = in.Title
	if d.Title == "" {
		d.Title = sc.GetName()
	}
	if d.Title == "" {
		d.Title = "fadeloop " + kind + " result"
	}
	return d, nil
}

// fillScenario writes the scenario as field-path rows and as indented JSON
// (proto field names, as scenario files use).
func fillScenario(v *scenarioView, sc *pb.Scenario) error {
	raw, err := protojson.MarshalOptions{UseProtoNames: true}.Marshal(sc)
	if err != nil {
		return fmt.Errorf("scenario JSON: %w", err)
	}
	var b bytes.Buffer
	if err := json.Indent(&b, raw, "", "  "); err != nil {
		return err
	}
	v.JSON = b.String()
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.UseNumber()
	if err := flatten(dec, "", &v.Rows); err != nil {
		return fmt.Errorf("scenario JSON: %w", err)
	}
	return nil
}

// usedReplications replaces the value of the scenario table's
// run.replications row (added when the scenario leaves it unset) by what a
// search ran, used: e.g. "2 per count"; the file's value, which the search
// does not use, is named after it. The JSON beside the table keeps
// the file's value. Nothing changes when used is "".
func usedReplications(v *scenarioView, used string) {
	if used == "" {
		return
	}
	const path = "run.replications"
	i := slices.IndexFunc(v.Rows, func(r [2]string) bool { return r[0] == path })
	if i < 0 {
		v.Rows = append(v.Rows, [2]string{path, used})
	} else {
		v.Rows[i][1] = used + "; the scenario file's " + v.Rows[i][1] + " is not used"
	}
	v.Note += " run.replications shows the replications the search ran; the JSON keeps the file's value."
}

// flatten reads one JSON value from dec and appends a (field path, value)
// row per scalar, in the order protojson wrote them (field-number order).
func flatten(dec *json.Decoder, prefix string, rows *[][2]string) error {
	tok, err := dec.Token()
	if err != nil {
		return err
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			for dec.More() {
				k, err := dec.Token()
				if err != nil {
					return err
				}
				p := fmt.Sprint(k)
				if prefix != "" {
					p = prefix + "." + p
				}
				if err := flatten(dec, p, rows); err != nil {
					return err
				}
			}
		case '[':
			i := 0
			for ; dec.More(); i++ {
				if err := flatten(dec, fmt.Sprintf("%s[%d]", prefix, i), rows); err != nil {
					return err
				}
			}
			if i == 0 {
				*rows = append(*rows, [2]string{prefix, "(none)"})
			}
		}
		_, err := dec.Token() // the closing delimiter
		return err
	case nil:
		*rows = append(*rows, [2]string{prefix, "null"})
	default:
		*rows = append(*rows, [2]string{prefix, fmt.Sprint(t)})
	}
	return nil
}

func orMissing(s string) string {
	if s == "" {
		return "not recorded in this result"
	}
	return s
}

package tune

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/loop"
)

// Limits of the grid machinery, shared by Sweep and Tune.
const (
	// MaxAxisValues is the most values one axis may have (listed numbers,
	// listed names or a range count); the .proto rules of SweepAxis use the
	// same number (service tests check that they agree).
	MaxAxisValues = 1024
	// MaxGridPoints is the most points a grid may have (product of the axis
	// lengths), for a sweep as for the tuner's candidates.
	MaxGridPoints = 100000
	// MaxAxes is the most axes of one grid.
	MaxAxes = 8
)

// StepPath is the field path of the inner loop's step size, the axis the
// tie rule, the reasons and the CLI's step plots single out.
const StepPath = "inner_loop.step_db"

// RatePath is the inner-loop update rate field, in Hz; tune plots and the
// tie rule read it.
const RatePath = "inner_loop.update_rate_hz"

// Axis is one searched scenario field: Path is its json-tag path (the proto
// field path, e.g. "inner_loop.step_db", "groups[0].speeds[0].speed_kmh",
// or "groups[1].speed_kmh" for every speed of group 1 at once).
//
// The values are one of:
//   - Values: an explicit list of 1 to MaxAxisValues finite numbers, kept in
//     the given order, set through loop.SetPath (integer fields take
//     integral values only);
//   - Names: an explicit list of 1 to MaxAxisValues texts, set through
//     loop.SetTextPath: enum value names (e.g. "COMMAND_FIXED_STEP",
//     "COMMAND_ADAPTIVE" for "inner_loop.command") or strings (e.g. "EPA",
//     "EVA" for "groups[0].profile");
//   - a range of Count points from First to Last inclusive: linearly spaced,
//     v_i = First + i·(Last−First)/(Count−1), or with Log geometrically
//     spaced, v_i = First·(Last/First)^(i/(Count−1)) (First, Last > 0).
//     Count 1 gives First. Integer fields need integral range points.
type Axis struct {
	Path   string    `json:"path"`
	Values []float64 `json:"values"`
	Names  []string  `json:"names"`
	First  float64   `json:"first"`
	Last   float64   `json:"last"`
	Count  int       `json:"count"`
	Log    bool      `json:"log"`
}

// Len returns the number of values of a (listed values, listed names or
// the range count) without resolving them.
func (a Axis) Len() int {
	switch {
	case len(a.Values) > 0:
		return len(a.Values)
	case len(a.Names) > 0:
		return len(a.Names)
	}
	return a.Count
}

// Resolve returns the numeric values of the axis (nil for a Names axis);
// prefix is the field path of the axis in the request (e.g. "axes[1]")
// used in violations. Listed values and names must be distinct.
func (a Axis) Resolve(prefix string) ([]float64, loop.Violations) {
	return a.resolve(prefix, true)
}

func (a Axis) resolve(prefix string, distinct bool) ([]float64, loop.Violations) {
	var v loop.Violations
	add := func(f, format string, args ...any) {
		v = append(v, loop.Violation{Field: prefix + "." + f, Rule: fmt.Sprintf(format, args...)})
	}
	if strings.TrimSpace(a.Path) == "" {
		add("path", "must name a scenario field, e.g. inner_loop.step_db")
	}
	forms := 0
	for _, set := range []bool{len(a.Values) > 0, len(a.Names) > 0, a.Count != 0} {
		if set {
			forms++
		}
	}
	if forms > 1 {
		add("count", "give one of values, names or a range (first, last, count), not several")
		return nil, v
	}
	if n := a.Len(); n > MaxAxisValues {
		add(map[bool]string{true: "values", false: "names"}[len(a.Values) > 0], "at most %d values, got %d", MaxAxisValues, n)
		return nil, v
	}
	if len(a.Names) > 0 {
		seen := make(map[string]bool, len(a.Names))
		for i, s := range a.Names {
			if strings.TrimSpace(s) == "" {
				add(fmt.Sprintf("names[%d]", i), "must not be empty")
			} else if distinct && seen[s] {
				add(fmt.Sprintf("names[%d]", i), "duplicate name %q", s)
			}
			seen[s] = true
		}
		return nil, v
	}
	if len(a.Values) > 0 {
		seen := make(map[float64]bool, len(a.Values))
		for i, x := range a.Values {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				add(fmt.Sprintf("values[%d]", i), "must be finite, got %g", x)
			} else if distinct && seen[x] {
				add(fmt.Sprintf("values[%d]", i), "duplicate value %g", x)
			}
			seen[x] = true
		}
		if len(v) > 0 {
			return nil, v
		}
		return append([]float64(nil), a.Values...), nil
	}
	switch {
	case a.Count < 1 || a.Count > MaxAxisValues:
		add("count", "must be in [1, %d] when no values or names are listed, got %d", MaxAxisValues, a.Count)
	case math.IsNaN(a.First) || math.IsInf(a.First, 0):
		add("first", "must be finite, got %g", a.First)
	case math.IsNaN(a.Last) || math.IsInf(a.Last, 0):
		add("last", "must be finite, got %g", a.Last)
	case a.Log && !(a.First > 0 && a.Last > 0):
		add("first", "a log range needs first > 0 and last > 0, got %g and %g", a.First, a.Last)
	case a.Count > 1 && a.First == a.Last:
		add("last", "must differ from first when count > 1, got %g twice", a.Last)
	}
	if len(v) > 0 {
		return nil, v
	}
	out := make([]float64, a.Count)
	for i := range out {
		if a.Count == 1 {
			out[i] = a.First
			continue
		}
		f := float64(i) / float64(a.Count-1)
		if a.Log {
			out[i] = a.First * math.Pow(a.Last/a.First, f)
		} else {
			out[i] = a.First + f*(a.Last-a.First)
		}
	}
	out[len(out)-1] = a.Last
	if a.Count == 1 {
		out[0] = a.First
	}
	return out, nil
}

// Coord is one coordinate of a grid point: the field path and its value.
// On a Names axis Text is the name set and Value its position in the axis'
// list (0, 1, ...), which orders text values for tie rules.
type Coord struct {
	Path  string  `json:"path"`
	Value float64 `json:"value"`
	Text  string  `json:"text"`
}

// apply sets the coordinate on sc.
func (c Coord) apply(sc *loop.Scenario) error {
	if c.Text != "" {
		return loop.SetTextPath(sc, c.Path, c.Text)
	}
	return loop.SetPath(sc, c.Path, c.Value)
}

// valueText is the coordinate's value as a label shows it.
func (c Coord) valueText() string {
	if c.Text != "" {
		return c.Text
	}
	return strconv.FormatFloat(c.Value, 'g', 6, 64)
}

// Point is one grid point. Index is its place in the grid's stable order
// (row-major: the last axis varies fastest, axes and values in request
// order); Coords has one entry per axis, in axis order.
type Point struct {
	Index  int     `json:"index"`
	Coords []Coord `json:"coords"`
}

// Apply sets every coordinate of p on sc through loop.SetPath or
// loop.SetTextPath. sc may be left partly changed on error; apply to a copy.
func (p Point) Apply(sc *loop.Scenario) error {
	for _, c := range p.Coords {
		if err := c.apply(sc); err != nil {
			return err
		}
	}
	return nil
}

// ApplyTo returns a deep copy of base (no slice shared with it) with p
// applied; base is never changed. This is how a sweep builds the scenario
// of grid point p.
func (p Point) ApplyTo(base loop.Scenario) (loop.Scenario, error) { return applyTo(p, base) }

// applyTo returns a deep copy of base with x applied (Point, Condition);
// base is never changed.
func applyTo(x interface{ Apply(*loop.Scenario) error }, base loop.Scenario) (loop.Scenario, error) {
	sc := base.Clone()
	if err := x.Apply(&sc); err != nil {
		return loop.Scenario{}, err
	}
	return sc, nil
}

// Value returns the coordinate of p on path and whether p has one.
func (p Point) Value(path string) (float64, bool) {
	for _, c := range p.Coords {
		if c.Path == path {
			return c.Value, true
		}
	}
	return 0, false
}

// Label is "name=value, name=value" saying exactly what was varied: a
// top-level block's field is shortened to its last element (e.g.
// "step_db=0.5, update_rate_hz=1500", "command=COMMAND_ADAPTIVE"); a field
// inside a list keeps its full path ("groups[0].speeds[1].speed_kmh=30"),
// and a group-level speed says it set every speed of that group
// ("groups[1].speed_kmh (every speed)=30"). "base setting" when p has no
// coordinates.
func (p Point) Label() string {
	if len(p.Coords) == 0 {
		return "base setting"
	}
	parts := make([]string, len(p.Coords))
	for i, c := range p.Coords {
		parts[i] = AxisLabel(c.Path) + "=" + c.valueText()
	}
	return strings.Join(parts, ", ")
}

// AxisLabel is the name of the field at path in point labels and table
// headers (see Point.Label).
func AxisLabel(path string) string {
	if strings.ContainsRune(path, '[') {
		if loop.IsGroupSpeedPath(path) {
			return path + " (every speed)"
		}
		return path
	}
	if j := strings.LastIndexByte(path, '.'); j >= 0 {
		return path[j+1:]
	}
	return path
}

// Grid is the Cartesian product of its axes, in a stable order (see Point).
// It holds the resolved values of each axis, never the points: Point(i)
// builds one point on demand, so a grid of any size costs memory in the
// sum of its axis lengths.
type Grid struct {
	Axes   []Axis      `json:"axes"`
	values [][]float64 // resolved numeric values per axis (nil for a Names axis)
	size   int
}

// NewGrid resolves and checks the axes for the tuner (values and names of
// one axis distinct; violations carry the paths "axes[i]..."), and checks
// every axis path against base with its first value. With no axes the grid
// has one point, the base setting.
func NewGrid(base loop.Scenario, axes []Axis) (*Grid, error) {
	return newGrid(base, axes, true)
}

// newGrid is NewGrid; distinct says whether an axis may repeat a value
// (a sweep may, e.g. to replicate a point under per-point seeds).
func newGrid(base loop.Scenario, axes []Axis, distinct bool) (*Grid, error) {
	var v loop.Violations
	if len(axes) > MaxAxes {
		return nil, loop.Violations{{Field: "axes", Rule: fmt.Sprintf("at most %d axes, got %d", MaxAxes, len(axes))}}
	}
	g := &Grid{Axes: append([]Axis(nil), axes...), values: make([][]float64, len(axes)), size: 1}
	seen := map[string]int{}
	for i, a := range axes {
		p := fmt.Sprintf("axes[%d]", i)
		vals, vv := a.resolve(p, distinct)
		v = append(v, vv...)
		if j, dup := seen[a.Path]; dup && a.Path != "" {
			v = append(v, loop.Violation{Field: p + ".path", Rule: fmt.Sprintf("%q is already axis %d", a.Path, j)})
		}
		seen[a.Path] = i
		if len(vv) > 0 {
			continue
		}
		first := Coord{Path: a.Path}
		if len(a.Names) > 0 {
			first.Text = a.Names[0]
		} else {
			first.Value = vals[0]
		}
		probe := base.Clone()
		if err := first.apply(&probe); err != nil {
			v = append(v, loop.Violation{Field: p + ".path", Rule: err.Error()})
		}
		g.values[i] = vals
		if vals != nil {
			g.Axes[i].Values = vals
			g.Axes[i].First, g.Axes[i].Last, g.Axes[i].Count, g.Axes[i].Log = 0, 0, 0, false
		}
		if g.size <= MaxGridPoints {
			g.size *= a.Len()
		}
	}
	if len(v) == 0 && g.size > MaxGridPoints {
		v = append(v, loop.Violation{Field: "axes", Rule: fmt.Sprintf("the grid has more than %d points (product of the axis lengths)", MaxGridPoints)})
	}
	if len(v) > 0 {
		return nil, v
	}
	return g, nil
}

// Size is the number of grid points.
func (g *Grid) Size() int { return g.size }

// axisLen is the number of values of axis a.
func (g *Grid) axisLen(a int) int {
	if g.values[a] != nil {
		return len(g.values[a])
	}
	return len(g.Axes[a].Names)
}

// coord is value k of axis a.
func (g *Grid) coord(a, k int) Coord {
	if g.values[a] != nil {
		return Coord{Path: g.Axes[a].Path, Value: g.values[a][k]}
	}
	return Coord{Path: g.Axes[a].Path, Value: float64(k), Text: g.Axes[a].Names[k]}
}

// Offsets returns the position on each axis of grid point i (row-major,
// last axis fastest), 0 <= i < Size(); it panics outside (a programmer
// error).
func (g *Grid) Offsets(i int) []int {
	if i < 0 || i >= g.size {
		panic(fmt.Sprintf("tune: grid point %d out of range [0, %d)", i, g.size))
	}
	idx := make([]int, len(g.values))
	rem := i
	for a := len(g.values) - 1; a >= 0; a-- {
		n := g.axisLen(a)
		idx[a] = rem % n
		rem /= n
	}
	return idx
}

// Point returns grid point i, 0 <= i < Size() (it panics outside: a
// programmer error).
func (g *Grid) Point(i int) Point {
	idx := g.Offsets(i)
	p := Point{Index: i, Coords: make([]Coord, len(idx))}
	for a, k := range idx {
		p.Coords[a] = g.coord(a, k)
	}
	return p
}

// Points returns every grid point in order. It materialises the grid: call
// it only after the request's cost was admitted (see TuneCost).
func (g *Grid) Points() []Point {
	out := make([]Point, g.size)
	for i := range out {
		out[i] = g.Point(i)
	}
	return out
}

// Override sets one scenario field for a condition: a number through
// loop.SetPath, or, when Text is not empty, a string or enum field (e.g.
// "groups[0].profile" = "EVA", "inner_loop.command" = "COMMAND_ADAPTIVE")
// through loop.SetTextPath.
type Override struct {
	Path  string  `json:"path"`
	Value float64 `json:"value"`
	Text  string  `json:"text"`
}

// Apply sets the override on sc.
func (o Override) Apply(sc *loop.Scenario) error {
	return Coord{Path: o.Path, Value: o.Value, Text: o.Text}.apply(sc)
}

// Condition is one operating condition the tuner must do well in: a set of
// overrides of the base scenario (speed, profile, user count, …) and a
// weight (> 0, relative) in the across-condition objective.
type Condition struct {
	Name      string     `json:"name"`
	Weight    float64    `json:"weight"`
	Overrides []Override `json:"overrides"`
}

// Apply applies every override in order.
func (c Condition) Apply(sc *loop.Scenario) error {
	for _, o := range c.Overrides {
		if err := o.Apply(sc); err != nil {
			return err
		}
	}
	return nil
}

// ApplyTo returns a deep copy of base with the condition applied; base is
// never changed.
func (c Condition) ApplyTo(base loop.Scenario) (loop.Scenario, error) { return applyTo(c, base) }

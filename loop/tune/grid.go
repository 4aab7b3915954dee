package tune

import (
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"

	"github.com/fadeloop/fadeloop/loop"
)

// Limits of the grid machinery.
const (
	// MaxAxisValues is the most values one axis may have.
	MaxAxisValues = 1000
	// MaxGridPoints is the most points a grid may have (product of the axis
	// lengths).
	MaxGridPoints = 100000
)

// Axis is one searched scenario field: Path is its json-tag path (the proto
// field path, e.g. "inner_loop.step_db", "groups[0].speeds[0].speed_kmh"),
// set through loop.SetPath, so any numeric field works (integer fields take
// integral values only).
//
// The values are either the explicit list Values (1 to MaxAxisValues distinct
// finite numbers, kept in the given order) or, when Values is empty, Count
// points from From to To inclusive: linearly spaced,
// v_i = From + i·(To−From)/(Count−1), or with Log geometrically spaced,
// v_i = From·(To/From)^(i/(Count−1)) (From, To > 0). Count 1 gives From.
// Integer fields need integral range points (e.g. From 0, To 4, Count 5).
type Axis struct {
	Path   string    `json:"path"`
	Values []float64 `json:"values"`
	From   float64   `json:"from"`
	To     float64   `json:"to"`
	Count  int       `json:"count"`
	Log    bool      `json:"log"`
}

// Resolve returns the axis values; prefix is the field path of the axis in
// the request (e.g. "axes[1]") used in violations.
func (a Axis) Resolve(prefix string) ([]float64, loop.Violations) {
	var v loop.Violations
	add := func(f, format string, args ...any) {
		v = append(v, loop.Violation{Field: prefix + "." + f, Rule: fmt.Sprintf(format, args...)})
	}
	if strings.TrimSpace(a.Path) == "" {
		add("path", "must name a scenario field, e.g. inner_loop.step_db")
	}
	if len(a.Values) > 0 {
		if a.Count != 0 {
			add("count", "give either values or a range (from, to, count), not both")
		}
		if len(a.Values) > MaxAxisValues {
			add("values", "at most %d values, got %d", MaxAxisValues, len(a.Values))
			return nil, v
		}
		seen := make(map[float64]bool, len(a.Values))
		for i, x := range a.Values {
			if math.IsNaN(x) || math.IsInf(x, 0) {
				add(fmt.Sprintf("values[%d]", i), "must be finite, got %g", x)
			} else if seen[x] {
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
		add("count", "must be in [1, %d] when no values are listed, got %d", MaxAxisValues, a.Count)
	case math.IsNaN(a.From) || math.IsInf(a.From, 0):
		add("from", "must be finite, got %g", a.From)
	case math.IsNaN(a.To) || math.IsInf(a.To, 0):
		add("to", "must be finite, got %g", a.To)
	case a.Log && !(a.From > 0 && a.To > 0):
		add("from", "a log range needs from > 0 and to > 0, got %g and %g", a.From, a.To)
	case a.Count > 1 && a.From == a.To:
		add("to", "must differ from from when count > 1, got %g twice", a.To)
	}
	if len(v) > 0 {
		return nil, v
	}
	out := make([]float64, a.Count)
	for i := range out {
		if a.Count == 1 {
			out[i] = a.From
			continue
		}
		f := float64(i) / float64(a.Count-1)
		if a.Log {
			out[i] = a.From * math.Pow(a.To/a.From, f)
		} else {
			out[i] = a.From + f*(a.To-a.From)
		}
	}
	out[len(out)-1] = a.To
	if a.Count == 1 {
		out[0] = a.From
	}
	return out, nil
}

// Coord is one coordinate of a grid point: the field path and its value.
type Coord struct {
	Path  string  `json:"path"`
	Value float64 `json:"value"`
}

// Point is one grid point. Index is its place in the grid's stable order
// (row-major: the last axis varies fastest, axes and values in request
// order); Coords has one entry per axis, in axis order.
type Point struct {
	Index  int     `json:"index"`
	Coords []Coord `json:"coords"`
}

// Apply sets every coordinate of p on sc through loop.SetPath. sc may be
// left partly changed on error; apply to a copy.
func (p Point) Apply(sc *loop.Scenario) error {
	for _, c := range p.Coords {
		if err := loop.SetPath(sc, c.Path, c.Value); err != nil {
			return err
		}
	}
	return nil
}

// ApplyTo returns a deep copy of base (no slice shared with it) with p
// applied; base is never changed. This is how a sweep builds the scenario
// of grid point p.
func (p Point) ApplyTo(base loop.Scenario) (loop.Scenario, error) {
	sc := cloneScenario(base)
	if err := p.Apply(&sc); err != nil {
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

// Label is "path=value, path=value" with the paths shortened to their last
// element (e.g. "step_db=0.5, update_rate_hz=1500"); "base setting" when p
// has no coordinates.
func (p Point) Label() string {
	if len(p.Coords) == 0 {
		return "base setting"
	}
	parts := make([]string, len(p.Coords))
	for i, c := range p.Coords {
		name := c.Path
		if j := strings.LastIndexByte(name, '.'); j >= 0 {
			name = name[j+1:]
		}
		parts[i] = name + "=" + strconv.FormatFloat(c.Value, 'g', 6, 64)
	}
	return strings.Join(parts, ", ")
}

// Grid is the Cartesian product of its axes, in a stable order (see Point).
type Grid struct {
	Axes   []Axis      `json:"axes"`
	values [][]float64 // resolved values per axis
	size   int
}

// NewGrid resolves and checks the axes (violations carry the paths
// "axes[i]...") and checks every axis path against base with loop.SetPath
// using the axis' first value. With no axes the grid has one point, the base
// setting.
func NewGrid(base loop.Scenario, axes []Axis) (*Grid, error) {
	var v loop.Violations
	g := &Grid{Axes: append([]Axis(nil), axes...), values: make([][]float64, len(axes)), size: 1}
	seen := map[string]int{}
	for i, a := range axes {
		p := fmt.Sprintf("axes[%d]", i)
		vals, vv := a.Resolve(p)
		v = append(v, vv...)
		if j, dup := seen[a.Path]; dup && a.Path != "" {
			v = append(v, loop.Violation{Field: p + ".path", Rule: fmt.Sprintf("%q is already axis %d", a.Path, j)})
		}
		seen[a.Path] = i
		if vals == nil {
			continue
		}
		probe := cloneScenario(base)
		if err := loop.SetPath(&probe, a.Path, vals[0]); err != nil && a.Path != "" {
			v = append(v, loop.Violation{Field: p + ".path", Rule: err.Error()})
		}
		g.values[i] = vals
		g.Axes[i].Values = vals
		g.Axes[i].From, g.Axes[i].To, g.Axes[i].Count, g.Axes[i].Log = 0, 0, 0, false
		if g.size <= MaxGridPoints {
			g.size *= len(vals)
		}
	}
	if len(v) == 0 && g.size > MaxGridPoints {
		v = append(v, loop.Violation{Field: "axes", Rule: fmt.Sprintf("the grid has more than %d points", MaxGridPoints)})
	}
	if len(v) > 0 {
		return nil, v
	}
	return g, nil
}

// Size is the number of grid points.
func (g *Grid) Size() int { return g.size }

// Point returns grid point i, 0 <= i < Size() (it panics outside: a
// programmer error).
func (g *Grid) Point(i int) Point {
	if i < 0 || i >= g.size {
		panic(fmt.Sprintf("tune: grid point %d out of range [0, %d)", i, g.size))
	}
	p := Point{Index: i, Coords: make([]Coord, len(g.values))}
	rem := i
	for a := len(g.values) - 1; a >= 0; a-- {
		n := len(g.values[a])
		p.Coords[a] = Coord{Path: g.Axes[a].Path, Value: g.values[a][rem%n]}
		rem /= n
	}
	return p
}

// Points returns every grid point in order.
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
	if o.Text != "" {
		return loop.SetTextPath(sc, o.Path, o.Text)
	}
	return loop.SetPath(sc, o.Path, o.Value)
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
func (c Condition) ApplyTo(base loop.Scenario) (loop.Scenario, error) {
	sc := cloneScenario(base)
	if err := c.Apply(&sc); err != nil {
		return loop.Scenario{}, err
	}
	return sc, nil
}

// CloneScenario returns a deep copy of sc: no slice is shared with it, so
// changing the copy never changes sc.
func CloneScenario(sc loop.Scenario) loop.Scenario { return cloneScenario(sc) }

// cloneScenario returns a deep copy of sc (no slice shared with it).
func cloneScenario(sc loop.Scenario) loop.Scenario {
	var out loop.Scenario
	deepCopy(reflect.ValueOf(&out).Elem(), reflect.ValueOf(sc))
	return out
}

func deepCopy(dst, src reflect.Value) {
	switch src.Kind() {
	case reflect.Struct:
		for i := 0; i < src.NumField(); i++ {
			if dst.Field(i).CanSet() {
				deepCopy(dst.Field(i), src.Field(i))
			}
		}
	case reflect.Slice:
		if src.IsNil() {
			dst.Set(reflect.Zero(src.Type()))
			return
		}
		s := reflect.MakeSlice(src.Type(), src.Len(), src.Len())
		for i := 0; i < src.Len(); i++ {
			deepCopy(s.Index(i), src.Index(i))
		}
		dst.Set(s)
	case reflect.Pointer:
		if src.IsNil() {
			dst.Set(reflect.Zero(src.Type()))
			return
		}
		p := reflect.New(src.Type().Elem())
		deepCopy(p.Elem(), src.Elem())
		dst.Set(p)
	case reflect.Map:
		if src.IsNil() {
			dst.Set(reflect.Zero(src.Type()))
			return
		}
		m := reflect.MakeMapWithSize(src.Type(), src.Len())
		it := src.MapRange()
		for it.Next() {
			val := reflect.New(src.Type().Elem()).Elem()
			deepCopy(val, it.Value())
			m.SetMapIndex(it.Key(), val)
		}
		dst.Set(m)
	default:
		dst.Set(src)
	}
}

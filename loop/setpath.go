package loop

import (
	"encoding"
	"fmt"
	"math"
	"reflect"
	"strconv"
	"strings"
)

// SetPath sets the numeric field (float, int or uint) of sc named by its
// json-tag path, e.g. "inner_loop.step_db", "groups[0].count",
// "groups[0].speeds[0].speed_kmh" — the axes of sweeps and of the tuner.
// The group-level path "groups[i].speed_kmh" (see IsGroupSpeedPath) sets
// the speed_kmh of every entry of group i's speed mix, keeping the weights.
// Integer fields take integral values within their range only. It returns
// an error naming the path for an unknown field, an index out of range, a
// non-numeric field (strings, bools, enums, lists) or a value the field
// cannot hold; sc is unchanged on error. Slices are not grown.
func SetPath(sc *Scenario, path string, value float64) error {
	if sc == nil {
		return fmt.Errorf("SetPath: nil scenario")
	}
	if path == "" {
		return fmt.Errorf("empty field path")
	}
	if IsGroupSpeedPath(path) {
		return setGroupSpeed(sc, path, value)
	}
	v, _, _, err := resolvePath(sc, path)
	if err != nil {
		return err
	}
	if v.CanAddr() {
		if _, isEnum := v.Addr().Interface().(encoding.TextUnmarshaler); isEnum {
			return fmt.Errorf("field path %q: %s is an enum, not a numeric field", path, v.Type().Name())
		}
	}
	switch v.Kind() {
	case reflect.Float32, reflect.Float64:
		v.SetFloat(value)
	case reflect.Int, reflect.Int8, reflect.Int16, reflect.Int32, reflect.Int64:
		if value != math.Trunc(value) || math.IsInf(value, 0) || math.IsNaN(value) {
			return fmt.Errorf("field path %q: integer field needs an integral value, got %g", path, value)
		}
		if value < -(1<<62) || value > 1<<62 || v.OverflowInt(int64(value)) {
			return fmt.Errorf("field path %q: value %g out of range of the integer field", path, value)
		}
		v.SetInt(int64(value))
	case reflect.Uint, reflect.Uint8, reflect.Uint16, reflect.Uint32, reflect.Uint64:
		if value != math.Trunc(value) || value < 0 || value >= 1<<63 || math.IsNaN(value) {
			return fmt.Errorf("field path %q: unsigned field needs a non-negative integral value below 2^63, got %g", path, value)
		}
		if v.OverflowUint(uint64(value)) {
			return fmt.Errorf("field path %q: value %g out of range of the field", path, value)
		}
		v.SetUint(uint64(value))
	default:
		return fmt.Errorf("field path %q: %s field is not numeric", path, v.Kind())
	}
	return nil
}

// GroupSpeedField is the last element of a group-level speed path.
const GroupSpeedField = "speed_kmh"

// IsGroupSpeedPath reports whether path is the group-level speed path
// "groups[i].speed_kmh" (i a non-negative integer): one value for every
// speed of the group's speed mix.
func IsGroupSpeedPath(path string) bool {
	head, ok := strings.CutSuffix(path, "."+GroupSpeedField)
	if !ok || strings.Contains(head, ".") {
		return false
	}
	name, idx, err := splitIndex(head)
	return err == nil && name == "groups" && len(idx) == 1
}

// setGroupSpeed sets every speed of the group named by a group-level speed
// path; sc is unchanged on error.
func setGroupSpeed(sc *Scenario, path string, value float64) error {
	_, idx, _ := splitIndex(strings.TrimSuffix(path, "."+GroupSpeedField))
	g := idx[0]
	if g >= len(sc.Groups) {
		return fmt.Errorf("field path %q: index %d out of range for \"groups\" (length %d)", path, g, len(sc.Groups))
	}
	if len(sc.Groups[g].Speeds) == 0 {
		return fmt.Errorf("field path %q: group %d has no speeds to set", path, g)
	}
	for i := range sc.Groups[g].Speeds {
		sc.Groups[g].Speeds[i].SpeedKmh = value
	}
	return nil
}

// resolvePath walks sc along a json-tag field path ("groups[0].speeds[1].speed_kmh")
// and returns the addressed field, the struct that holds its last named field,
// and that field's name; the error names the path and what did not resolve.
func resolvePath(sc *Scenario, path string) (v, parent reflect.Value, last string, err error) {
	v = reflect.ValueOf(sc).Elem()
	rest := path
	walked := ""
	for rest != "" {
		var tok string
		if i := strings.IndexByte(rest, '.'); i >= 0 {
			tok, rest = rest[:i], rest[i+1:]
			if rest == "" {
				return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: trailing '.'", path)
			}
		} else {
			tok, rest = rest, ""
		}
		name, idx, err := splitIndex(tok)
		if err != nil {
			return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: %v", path, err)
		}
		if v.Kind() != reflect.Struct {
			return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: %q is not a message", path, walked)
		}
		f, ok := fieldByTag(v, name)
		if !ok {
			return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: unknown field %q in %s (known: %s)", path, name, orRoot(walked), strings.Join(tagNames(v.Type()), ", "))
		}
		parent, last = v, name
		if walked != "" {
			walked += "."
		}
		walked += name
		v = f
		for _, k := range idx {
			if v.Kind() != reflect.Slice {
				return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: %q is not a list", path, walked)
			}
			if k >= v.Len() {
				return reflect.Value{}, reflect.Value{}, "", fmt.Errorf("field path %q: index %d out of range for %q (length %d)", path, k, walked, v.Len())
			}
			v = v.Index(k)
			walked += "[" + strconv.Itoa(k) + "]"
		}
	}
	return v, parent, last, nil
}

// SetTextPath sets the string field, or the enum field by its proto value
// name (e.g. "INNER_MODE_FIXED_POWER"), of sc named by its json-tag path, in
// the path syntax of SetPath ("groups[0].profile"). Setting a group's
// profile clears its custom_taps (exactly one of the two may be set). It
// returns an error naming the path for an unknown field, an index out of
// range, a field that is neither a string nor an enum, or an unknown enum
// name; sc is unchanged on error.
func SetTextPath(sc *Scenario, path, text string) error {
	if sc == nil {
		return fmt.Errorf("SetTextPath: nil scenario")
	}
	if path == "" {
		return fmt.Errorf("empty field path")
	}
	v, parent, last, err := resolvePath(sc, path)
	if err != nil {
		return err
	}
	if u, ok := v.Addr().Interface().(encoding.TextUnmarshaler); ok {
		old := v.Interface()
		if err := u.UnmarshalText([]byte(text)); err != nil {
			v.Set(reflect.ValueOf(old))
			return fmt.Errorf("field path %q: %v", path, err)
		}
		return nil
	}
	if v.Kind() != reflect.String {
		return fmt.Errorf("field path %q: %s field takes a number, not text", path, v.Kind())
	}
	v.SetString(text)
	if last == "profile" && len(text) > 0 {
		if taps, ok := fieldByTag(parent, "custom_taps"); ok && taps.Kind() == reflect.Slice {
			taps.Set(reflect.Zero(taps.Type()))
		}
	}
	return nil
}

func orRoot(s string) string {
	if s == "" {
		return "the scenario"
	}
	return "\"" + s + "\""
}

// splitIndex splits "speeds[0][1]" into "speeds" and [0, 1].
func splitIndex(tok string) (string, []int, error) {
	i := strings.IndexByte(tok, '[')
	if i < 0 {
		if tok == "" {
			return "", nil, fmt.Errorf("empty field name")
		}
		if strings.ContainsRune(tok, ']') {
			return "", nil, fmt.Errorf("stray ']' in %q", tok)
		}
		return tok, nil, nil
	}
	name, rest := tok[:i], tok[i:]
	if name == "" {
		return "", nil, fmt.Errorf("index without a field name in %q", tok)
	}
	var idx []int
	for rest != "" {
		if rest[0] != '[' {
			return "", nil, fmt.Errorf("malformed index in %q", tok)
		}
		j := strings.IndexByte(rest, ']')
		if j < 0 {
			return "", nil, fmt.Errorf("unclosed '[' in %q", tok)
		}
		k, err := strconv.Atoi(rest[1:j])
		if err != nil || k < 0 {
			return "", nil, fmt.Errorf("index %q in %q must be a non-negative integer", rest[1:j], tok)
		}
		idx = append(idx, k)
		rest = rest[j+1:]
	}
	return name, idx, nil
}

func jsonName(f reflect.StructField) string {
	tag := f.Tag.Get("json")
	if i := strings.IndexByte(tag, ','); i >= 0 {
		tag = tag[:i]
	}
	return tag
}

func fieldByTag(v reflect.Value, name string) (reflect.Value, bool) {
	t := v.Type()
	for i := 0; i < t.NumField(); i++ {
		if jsonName(t.Field(i)) == name {
			return v.Field(i), true
		}
	}
	return reflect.Value{}, false
}

func tagNames(t reflect.Type) []string {
	var out []string
	for i := 0; i < t.NumField(); i++ {
		if n := jsonName(t.Field(i)); n != "" && n != "-" {
			out = append(out, n)
		}
	}
	return out
}

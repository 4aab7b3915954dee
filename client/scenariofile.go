package client

import (
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"
	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// A scenario file is the protojson form of fadeloop.v1.Scenario, written as
// JSON or as YAML (YAML is mapped to the same JSON: mappings are objects,
// sequences are arrays). Field names are the proto names (snake_case, e.g.
// "step_db") or their JSON names ("stepDb"); enum values are their names
// ("PLACEMENT_UNIFORM_AREA"); 64-bit integers may be numbers or strings.
// Unknown fields are rejected by name.

// FileViolation is a problem in a scenario file: the field path within the
// scenario (e.g. "groups[1].speeds[0].speed_kmh"), the rule, and the 1-based
// line in the file where the field (or its nearest enclosing field) is,
// 0 when unknown.
type FileViolation struct {
	Path string
	Rule string
	Line int
	// Source, when set, is where the value came from instead of the file
	// (a command-line flag such as "--axis 1"); the line then starts with
	// it rather than the file's name.
	Source string
}

// ScenarioFileError lists every problem found in a scenario file. Its Error
// text has one "file:line: path: rule" line per violation.
type ScenarioFileError struct {
	File       string
	Violations []FileViolation
}

// Error lists the violations, one "file:line: path: rule" per line, in
// the order a reader meets them: the file's, by line (ties in the order
// found), then the file's without a line, then those from the command
// line (Source set).
func (e *ScenarioFileError) Error() string {
	var b strings.Builder
	for i, v := range e.ordered() {
		if i > 0 {
			b.WriteByte('\n')
		}
		switch {
		case v.Source != "":
			b.WriteString(v.Source)
		default:
			b.WriteString(e.File)
			if v.Line > 0 {
				fmt.Fprintf(&b, ":%d", v.Line)
			}
		}
		b.WriteString(": ")
		if v.Path != "" {
			b.WriteString(v.Path)
			b.WriteString(": ")
		}
		b.WriteString(v.Rule)
	}
	return b.String()
}

// ordered returns the violations in reading order (see Error).
func (e *ScenarioFileError) ordered() []FileViolation {
	rank := func(v FileViolation) (int, int) {
		switch {
		case v.Source != "":
			return 2, 0
		case v.Line == 0:
			return 1, 0
		}
		return 0, v.Line
	}
	out := slices.Clone(e.Violations)
	slices.SortStableFunc(out, func(a, b FileViolation) int {
		ga, la := rank(a)
		gb, lb := rank(b)
		if ga != gb {
			return ga - gb
		}
		return la - lb
	})
	return out
}

// Annotate appends note to the rule of every violation whose path starts
// with pathPrefix (for example the run settings a command-line flag
// replaced, so the message does not send the reader to the file's line
// alone).
func (e *ScenarioFileError) Annotate(pathPrefix, note string) {
	for i := range e.Violations {
		if strings.HasPrefix(e.Violations[i].Path, pathPrefix) {
			e.Violations[i].Rule += " " + note
		}
	}
}

// SourceFile records the line of every field path of a parsed file, so
// that the server's field violations can be shown at their line.
type SourceFile struct {
	Name  string
	lines map[string]int
}

// ScenarioFile is a parsed scenario file.
type ScenarioFile struct {
	SourceFile
	Scenario *pb.Scenario
}

// LoadScenarioFile reads and parses a scenario file (JSON or YAML).
func LoadScenarioFile(path string) (*ScenarioFile, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParseScenario(path, data)
}

// ParseScenario parses scenario source text (JSON or YAML) named name (used
// in messages). Problems are returned as *ScenarioFileError: unknown fields
// (by name), values of the wrong type, unknown enum names, syntax errors.
// Range rules are the server's to check (see ScenarioFile.Locate).
func ParseScenario(name string, data []byte) (*ScenarioFile, error) {
	sc := &pb.Scenario{}
	src, err := ParseMessage(name, data, sc)
	if err != nil {
		return nil, err
	}
	return &ScenarioFile{SourceFile: *src, Scenario: sc}, nil
}

// ParseMessage parses JSON or YAML source text into m (any fadeloop.v1
// message, e.g. a SweepRequest file), with the checks of ParseScenario.
func ParseMessage(name string, data []byte, m proto.Message) (*SourceFile, error) {
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, &ScenarioFileError{File: name, Violations: []FileViolation{{Rule: yamlErrorText(err), Line: yamlErrorLine(err)}}}
	}
	if root.Kind == 0 || len(root.Content) == 0 {
		return nil, &ScenarioFileError{File: name, Violations: []FileViolation{{Rule: "file is empty"}}}
	}
	w := &walker{lines: map[string]int{}}
	doc := root.Content[0]
	value := w.message(doc, m.ProtoReflect().Descriptor(), "")
	if len(w.violations) > 0 {
		return nil, &ScenarioFileError{File: name, Violations: w.violations}
	}
	js, err := json.Marshal(value)
	if err != nil {
		return nil, &ScenarioFileError{File: name, Violations: []FileViolation{{Rule: err.Error()}}}
	}
	if err := (protojson.UnmarshalOptions{}).Unmarshal(js, m); err != nil {
		return nil, &ScenarioFileError{File: name, Violations: []FileViolation{{Rule: strings.TrimPrefix(err.Error(), "proto: ")}}}
	}
	return &SourceFile{Name: name, lines: w.lines}, nil
}

// Line returns the line of a scenario field path (as in the file, without a
// request prefix such as "scenario."), or of its nearest enclosing field
// present in the file; 0 when none is.
func (f *SourceFile) Line(path string) int {
	for p := path; p != ""; p = parentPath(p) {
		if l, ok := f.lines[p]; ok {
			return l
		}
	}
	return 0
}

// Locate maps the server's violations of a request that carried this
// file's message under prefix (e.g. "scenario" for Simulate, "base" for
// Sweep; "" when the file is the whole request) to the file. Violations outside the scenario keep their full path and line 0.
func (f *SourceFile) Locate(prefix string, vs []FieldViolation) *ScenarioFileError {
	e := &ScenarioFileError{File: f.Name}
	for _, v := range vs {
		p, ok := v.Field, true
		if prefix != "" {
			p, ok = strings.CutPrefix(v.Field, prefix+".")
		}
		if !ok {
			e.Violations = append(e.Violations, FileViolation{Path: v.Field, Rule: v.Rule})
			continue
		}
		e.Violations = append(e.Violations, FileViolation{Path: p, Rule: v.Rule, Line: f.Line(p)})
	}
	return e
}

func parentPath(p string) string {
	if strings.HasSuffix(p, "]") {
		if i := strings.LastIndexByte(p, '['); i >= 0 {
			return p[:i]
		}
	}
	if i := strings.LastIndexByte(p, '.'); i >= 0 {
		return p[:i]
	}
	return ""
}

type walker struct {
	lines      map[string]int
	violations []FileViolation
}

func (w *walker) bad(n *yaml.Node, path, rule string) {
	w.violations = append(w.violations, FileViolation{Path: path, Rule: rule, Line: n.Line})
}

func join(path, field string) string {
	if path == "" {
		return field
	}
	return path + "." + field
}

// message checks a mapping node against a message descriptor and returns
// its JSON value (map with proto field names).
func (w *walker) message(n *yaml.Node, md protoreflect.MessageDescriptor, path string) any {
	n = resolveAlias(n)
	if n.Kind != yaml.MappingNode {
		if isNull(n) {
			return nil
		}
		w.bad(n, path, fmt.Sprintf("must be a mapping of %s fields, got %s", md.Name(), kindName(n)))
		return nil
	}
	out := map[string]any{}
	for i := 0; i+1 < len(n.Content); i += 2 {
		k, v := n.Content[i], resolveAlias(n.Content[i+1])
		if k.Tag == "!!merge" {
			w.bad(k, path, "YAML merge keys (<<) are not supported in scenario files")
			continue
		}
		fd := md.Fields().ByName(protoreflect.Name(k.Value))
		if fd == nil {
			fd = md.Fields().ByJSONName(k.Value)
		}
		if fd == nil {
			w.bad(k, join(path, k.Value), fmt.Sprintf("unknown field %q in %s (known: %s)", k.Value, md.Name(), fieldNames(md)))
			continue
		}
		fp := join(path, string(fd.Name()))
		if _, dup := out[string(fd.Name())]; dup {
			w.bad(k, fp, "field given twice")
			continue
		}
		w.lines[fp] = k.Line
		out[string(fd.Name())] = w.field(v, fd, fp)
	}
	return out
}

func (w *walker) field(n *yaml.Node, fd protoreflect.FieldDescriptor, path string) any {
	if fd.IsList() {
		if isNull(n) {
			return nil
		}
		if n.Kind != yaml.SequenceNode {
			w.bad(n, path, fmt.Sprintf("must be a list, got %s", kindName(n)))
			return nil
		}
		out := make([]any, len(n.Content))
		for i, item := range n.Content {
			ip := fmt.Sprintf("%s[%d]", path, i)
			w.lines[ip] = item.Line
			out[i] = w.single(resolveAlias(item), fd, ip)
		}
		return out
	}
	if fd.IsMap() {
		w.bad(n, path, "map fields are not supported in scenario files")
		return nil
	}
	return w.single(n, fd, path)
}

func (w *walker) single(n *yaml.Node, fd protoreflect.FieldDescriptor, path string) any {
	switch fd.Kind() {
	case protoreflect.MessageKind, protoreflect.GroupKind:
		return w.message(n, fd.Message(), path)
	case protoreflect.EnumKind:
		return w.enum(n, fd.Enum(), path)
	}
	if n.Kind != yaml.ScalarNode {
		w.bad(n, path, fmt.Sprintf("must be a single value, got %s", kindName(n)))
		return nil
	}
	if isNull(n) {
		return nil
	}
	switch fd.Kind() {
	case protoreflect.BoolKind:
		b, err := strconv.ParseBool(n.Value)
		if err != nil || n.Tag != "!!bool" {
			w.bad(n, path, fmt.Sprintf("must be true or false, got %q", n.Value))
			return nil
		}
		return b
	case protoreflect.StringKind:
		return n.Value
	case protoreflect.BytesKind:
		return n.Value
	case protoreflect.DoubleKind, protoreflect.FloatKind:
		f, err := parseNumber(n)
		if err != nil {
			w.bad(n, path, fmt.Sprintf("must be a number, got %q", n.Value))
			return nil
		}
		if math.IsNaN(f) || math.IsInf(f, 0) {
			w.bad(n, path, fmt.Sprintf("must be finite, got %q", n.Value))
			return nil
		}
		return f
	default: // integers
		v := strings.ReplaceAll(n.Value, "_", "")
		if n.Tag != "!!int" && n.Tag != "!!str" && n.Tag != "!!float" {
			w.bad(n, path, fmt.Sprintf("must be a whole number, got %q", n.Value))
			return nil
		}
		unsigned := fd.Kind() == protoreflect.Uint64Kind || fd.Kind() == protoreflect.Uint32Kind ||
			fd.Kind() == protoreflect.Fixed64Kind || fd.Kind() == protoreflect.Fixed32Kind
		if unsigned {
			u, err := strconv.ParseUint(v, 10, 64)
			if err != nil {
				var f float64
				if f, err = wholeFloat(v); err == nil && f < 0 {
					err = errors.New("negative")
				}
				u = uint64(f)
			}
			if err != nil {
				w.bad(n, path, fmt.Sprintf("must be a whole number >= 0, got %q", n.Value))
				return nil
			}
			return json.Number(strconv.FormatUint(u, 10))
		}
		i, err := strconv.ParseInt(v, 10, 64)
		if err != nil {
			var f float64
			f, err = wholeFloat(v)
			i = int64(f)
		}
		if err != nil {
			w.bad(n, path, fmt.Sprintf("must be a whole number, got %q", n.Value))
			return nil
		}
		return json.Number(strconv.FormatInt(i, 10))
	}
}

// wholeFloat accepts integral values written as floats ("1.5e4"), up to
// 9e15 in magnitude (exact in float64).
func wholeFloat(v string) (float64, error) {
	f, err := strconv.ParseFloat(v, 64)
	if err != nil || f != math.Trunc(f) || math.Abs(f) > 9e15 {
		return 0, errors.New("not a whole number")
	}
	return f, nil
}

func parseNumber(n *yaml.Node) (float64, error) {
	switch n.Tag {
	case "!!int", "!!float":
	case "!!str":
		if n.Style&(yaml.DoubleQuotedStyle|yaml.SingleQuotedStyle) == 0 {
			return 0, errors.New("not a number")
		}
	default:
		return 0, errors.New("not a number")
	}
	return strconv.ParseFloat(strings.ReplaceAll(n.Value, "_", ""), 64)
}

func (w *walker) enum(n *yaml.Node, ed protoreflect.EnumDescriptor, path string) any {
	if n.Kind != yaml.ScalarNode || isNull(n) {
		w.bad(n, path, fmt.Sprintf("must be one of %s", enumNames(ed)))
		return nil
	}
	if ev := ed.Values().ByName(protoreflect.Name(n.Value)); ev != nil {
		return n.Value
	}
	if n.Tag == "!!int" {
		if i, err := strconv.ParseInt(n.Value, 10, 32); err == nil && ed.Values().ByNumber(protoreflect.EnumNumber(i)) != nil {
			return string(ed.Values().ByNumber(protoreflect.EnumNumber(i)).Name())
		}
	}
	w.bad(n, path, fmt.Sprintf("unknown value %q; must be one of %s", n.Value, enumNames(ed)))
	return nil
}

func enumNames(ed protoreflect.EnumDescriptor) string {
	var names []string
	for i := range ed.Values().Len() {
		v := ed.Values().Get(i)
		if v.Number() == 0 {
			continue
		}
		names = append(names, string(v.Name()))
	}
	return strings.Join(names, ", ")
}

func fieldNames(md protoreflect.MessageDescriptor) string {
	var names []string
	for i := range md.Fields().Len() {
		names = append(names, string(md.Fields().Get(i).Name()))
	}
	slices.Sort(names)
	return strings.Join(names, ", ")
}

func resolveAlias(n *yaml.Node) *yaml.Node {
	for n != nil && n.Kind == yaml.AliasNode && n.Alias != nil {
		n = n.Alias
	}
	return n
}

func isNull(n *yaml.Node) bool { return n.Kind == yaml.ScalarNode && n.Tag == "!!null" }

func kindName(n *yaml.Node) string {
	switch n.Kind {
	case yaml.MappingNode:
		return "a mapping"
	case yaml.SequenceNode:
		return "a list"
	case yaml.ScalarNode:
		return fmt.Sprintf("%q", n.Value)
	}
	return "nothing"
}

func yamlErrorText(err error) string {
	s := strings.TrimPrefix(err.Error(), "yaml: ")
	if i := strings.Index(s, "line "); i == 0 {
		if j := strings.Index(s, ": "); j > 0 {
			return "syntax error: " + s[j+2:]
		}
	}
	return "syntax error: " + s
}

func yamlErrorLine(err error) int {
	s := strings.TrimPrefix(err.Error(), "yaml: ")
	if rest, ok := strings.CutPrefix(s, "line "); ok {
		if j := strings.IndexByte(rest, ':'); j > 0 {
			if l, err := strconv.Atoi(rest[:j]); err == nil {
				return l
			}
		}
	}
	return 0
}

// MarshalScenarioJSON writes a scenario as indented protojson with proto
// field names (the form of the files in testdata/scenarios).
func MarshalScenarioJSON(m proto.Message) ([]byte, error) {
	b, err := protojson.MarshalOptions{Multiline: true, Indent: "  ", UseProtoNames: true}.Marshal(m)
	if err != nil {
		return nil, err
	}
	return append(b, '\n'), nil
}

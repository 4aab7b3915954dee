package service

import (
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"google.golang.org/protobuf/encoding/protojson"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	"github.com/fadeloop/fadeloop/loop"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

var update = flag.Bool("update", false, "rewrite testdata/scenarios/canonical.json from loop.CanonicalScenario")

// TestEnumsMirror checks that every fadeloop.v1 enum value has the same
// number and name as the engine's Go enum (the conversions are casts).
func TestEnumsMirror(t *testing.T) {
	cases := []struct {
		desc protoreflect.EnumDescriptor
		name func(int) string
	}{
		{pb.Placement(0).Descriptor(), func(i int) string { return loop.Placement(i).String() }},
		{pb.Generator(0).Descriptor(), func(i int) string { return loop.Generator(i).String() }},
		{pb.PathLossModel(0).Descriptor(), func(i int) string { return loop.PathLossModel(i).String() }},
		{pb.InnerMode(0).Descriptor(), func(i int) string { return loop.InnerMode(i).String() }},
		{pb.Command(0).Descriptor(), func(i int) string { return loop.Command(i).String() }},
		{pb.InitialPower(0).Descriptor(), func(i int) string { return loop.InitialPower(i).String() }},
		{pb.LinkKind(0).Descriptor(), func(i int) string { return loop.LinkKind(i).String() }},
		{pb.EffectiveSir(0).Descriptor(), func(i int) string { return loop.EffectiveSIR(i).String() }},
		{pb.RakeFingers(0).Descriptor(), func(i int) string { return loop.RakeFingers(i).String() }},
		{pb.FastFading(0).Descriptor(), func(i int) string { return loop.FastFading(i).String() }},
	}
	for _, c := range cases {
		vals := c.desc.Values()
		for i := range vals.Len() {
			v := vals.Get(i)
			if got := c.name(int(v.Number())); got != string(v.Name()) {
				t.Errorf("%s: number %d is %s in the proto, %s in loop", c.desc.Name(), v.Number(), v.Name(), got)
			}
		}
		// One past the last proto value is not a loop value either.
		next := vals.Len()
		if got := c.name(next); !isNumber(got) {
			t.Errorf("%s: loop has value %d (%s) that the proto lacks", c.desc.Name(), next, got)
		}
	}
}

func isNumber(s string) bool {
	var n int
	_, err := fmt.Sscanf(s, "%d", &n)
	return err == nil
}

// TestFieldNamesMirror checks the Scenario contract: every loop struct
// field's json tag is a field of the matching proto message and vice versa,
// recursively, so that field paths mean the same on both sides.
func TestFieldNamesMirror(t *testing.T) {
	var walk func(path string, gt reflect.Type, md protoreflect.MessageDescriptor)
	walk = func(path string, gt reflect.Type, md protoreflect.MessageDescriptor) {
		seen := map[string]bool{}
		for i := range gt.NumField() {
			f := gt.Field(i)
			tag := strings.Split(f.Tag.Get("json"), ",")[0]
			if tag == "" || tag == "-" {
				continue
			}
			seen[tag] = true
			fd := md.Fields().ByName(protoreflect.Name(tag))
			if fd == nil {
				t.Errorf("%s%s: in loop.%s but not in proto %s", path, tag, gt.Name(), md.FullName())
				continue
			}
			ft := f.Type
			if ft.Kind() == reflect.Slice {
				if !fd.IsList() {
					t.Errorf("%s%s: list in loop, not in proto", path, tag)
				}
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Struct {
				if fd.Message() == nil {
					t.Errorf("%s%s: message in loop, scalar in proto", path, tag)
					continue
				}
				walk(path+tag+".", ft, fd.Message())
			}
		}
		for i := range md.Fields().Len() {
			if n := string(md.Fields().Get(i).Name()); !seen[n] {
				t.Errorf("%s%s: in proto %s but not in loop.%s", path, n, md.FullName(), gt.Name())
			}
		}
	}
	walk("", reflect.TypeFor[loop.Scenario](), (&pb.Scenario{}).ProtoReflect().Descriptor())
}

// populate sets every field of m (recursively) to a distinct non-zero
// value, lists to two elements, enums to their value 1 + k mod (n-1).
func populate(m protoreflect.Message, k *int) {
	fields := m.Descriptor().Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		*k++
		if fd.IsList() {
			l := m.Mutable(fd).List()
			for range 2 {
				if fd.Message() != nil {
					e := l.NewElement()
					populate(e.Message(), k)
					l.Append(e)
				} else {
					l.Append(scalar(fd, k))
				}
				*k++
			}
			continue
		}
		if fd.Message() != nil {
			populate(m.Mutable(fd).Message(), k)
			continue
		}
		m.Set(fd, scalar(fd, k))
	}
}

func scalar(fd protoreflect.FieldDescriptor, k *int) protoreflect.Value {
	n := *k
	switch fd.Kind() {
	case protoreflect.DoubleKind:
		return protoreflect.ValueOfFloat64(float64(n) + 0.25)
	case protoreflect.FloatKind:
		return protoreflect.ValueOfFloat32(float32(n) + 0.25)
	case protoreflect.Int32Kind:
		return protoreflect.ValueOfInt32(int32(n))
	case protoreflect.Int64Kind:
		return protoreflect.ValueOfInt64(int64(n))
	case protoreflect.Uint64Kind:
		return protoreflect.ValueOfUint64(uint64(n) << 40)
	case protoreflect.BoolKind:
		return protoreflect.ValueOfBool(true)
	case protoreflect.StringKind:
		return protoreflect.ValueOfString(fmt.Sprintf("s%d", n))
	case protoreflect.EnumKind:
		vals := fd.Enum().Values()
		return protoreflect.ValueOfEnum(vals.Get(1 + n%(vals.Len()-1)).Number())
	}
	panic(fmt.Sprintf("populate: unhandled kind %v of %s", fd.Kind(), fd.FullName()))
}

// TestScenarioRoundTrip converts fully populated scenarios proto → loop →
// proto and loop → proto → loop; a field the conversion forgets is lost and
// fails the comparison.
func TestScenarioRoundTrip(t *testing.T) {
	for seed := range 3 {
		m := &pb.Scenario{}
		k := seed * 1000
		populate(m.ProtoReflect(), &k)
		back := ScenarioToProto(ScenarioFromProto(m))
		if !proto.Equal(m, back) {
			t.Fatalf("proto → loop → proto changed the scenario:\nin:  %v\nout: %v", m, back)
		}
		sc := ScenarioFromProto(m)
		if got := ScenarioFromProto(ScenarioToProto(sc)); !reflect.DeepEqual(got, sc) {
			t.Fatalf("loop → proto → loop changed the scenario:\nin:  %+v\nout: %+v", sc, got)
		}
	}
	can := loop.CanonicalScenario()
	if got := ScenarioFromProto(ScenarioToProto(can)); !reflect.DeepEqual(got, can) {
		t.Fatalf("canonical scenario changed in the round trip:\nin:  %+v\nout: %+v", can, got)
	}
	if got := ScenarioFromProto(nil); !reflect.DeepEqual(got, loop.Scenario{}) {
		t.Errorf("nil proto gives %+v", got)
	}
}

func scenarioPath(name string) string {
	return filepath.Join("..", "testdata", "scenarios", name)
}

// TestCanonicalJSON checks that testdata/scenarios/canonical.json is the
// protojson form of loop.CanonicalScenario (run with -update to rewrite it).
func TestCanonicalJSON(t *testing.T) {
	path := scenarioPath("canonical.json")
	if *update {
		b, err := protojson.MarshalOptions{Multiline: true, Indent: "  ", UseProtoNames: true, EmitUnpopulated: true}.Marshal(ScenarioToProto(loop.CanonicalScenario()))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, append(b, '\n'), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	sc := readScenario(t, "canonical.json")
	if got, want := ScenarioFromProto(sc), loop.CanonicalScenario(); !reflect.DeepEqual(got, want) {
		t.Fatalf("canonical.json converts to\n%+v\nwant loop.CanonicalScenario()\n%+v", got, want)
	}
}

// readScenario reads a protojson scenario from testdata/scenarios.
func readScenario(t testing.TB, name string) *pb.Scenario {
	t.Helper()
	b, err := os.ReadFile(scenarioPath(name))
	if err != nil {
		t.Fatal(err)
	}
	sc := &pb.Scenario{}
	if err := protojson.Unmarshal(b, sc); err != nil {
		t.Fatalf("%s: %v", name, err)
	}
	return sc
}

// TestScenarioFilesValid checks that every scenario in testdata/scenarios
// passes the proto rules and the engine's validation unchanged.
func TestScenarioFilesValid(t *testing.T) {
	v, err := newProtoValidator()
	if err != nil {
		t.Fatal(err)
	}
	files, err := filepath.Glob(scenarioPath("*.json"))
	if err != nil || len(files) < 2 {
		t.Fatalf("scenario files: %v %v", files, err)
	}
	for _, f := range files {
		sc := readScenario(t, filepath.Base(f))
		if vs := v.check(sc, ""); len(vs) > 0 {
			t.Errorf("%s: proto rules: %v", f, vs)
		}
		if _, vs := domainScenario(sc, ""); len(vs) > 0 {
			t.Errorf("%s: engine rules: %v", f, vs)
		}
	}
}

// TestReportRoundTrip fills every field of a RunReport and converts it
// proto → loop → proto: a field the conversion forgets is lost.
func TestReportRoundTrip(t *testing.T) {
	m := &pb.RunReport{}
	k := 0
	populate(m.ProtoReflect(), &k)
	if back := ReportToProto(ReportFromProto(m)); !proto.Equal(m, back) {
		t.Fatalf("report changed in the round trip:\nin:  %v\nout: %v", m, back)
	}
	if ReportToProto(nil) != nil || ReportFromProto(nil) != nil {
		t.Error("nil report not passed through as nil")
	}
}

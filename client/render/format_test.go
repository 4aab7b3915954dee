package render

import (
	"math"
	"strings"
	"testing"

	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestFigureKeysAreProtoNames: one name per figure across proto and CLI.
// Every Estimate of fadeloop.v1.Figures is a column whose stem is its proto
// field name, every percentile of a Percentiles field is the column
// <stem>_p<N>_<unit> (sir_error_percentiles_db.p5 → sir_error_p5_db), and
// each column's getter reads exactly that field.
func TestFigureKeysAreProtoNames(t *testing.T) {
	f := &pb.Figures{}
	want := map[string]*pb.Estimate{}
	n := 0
	next := func() *pb.Estimate { n++; return &pb.Estimate{Value: float64(n)} }
	fields := f.ProtoReflect().Descriptor().Fields()
	for i := range fields.Len() {
		fd := fields.Get(i)
		if fd.Kind() != protoreflect.MessageKind {
			continue
		}
		switch fd.Message().Name() {
		case "Estimate":
			e := next()
			f.ProtoReflect().Set(fd, protoreflect.ValueOfMessage(e.ProtoReflect()))
			want[string(fd.Name())] = e
		case "Percentiles":
			p := &pb.Percentiles{}
			stem, unit, _ := strings.Cut(string(fd.Name()), "_percentiles_")
			pf := p.ProtoReflect().Descriptor().Fields()
			for j := range pf.Len() {
				e := next()
				p.ProtoReflect().Set(pf.Get(j), protoreflect.ValueOfMessage(e.ProtoReflect()))
				want[stem+"_"+string(pf.Get(j).Name())+"_"+unit] = e
			}
			f.ProtoReflect().Set(fd, protoreflect.ValueOfMessage(p.ProtoReflect()))
		}
	}
	seen := map[string]bool{}
	for _, fig := range figures {
		seen[fig.Key] = true
		e, ok := want[fig.Key]
		if !ok {
			t.Errorf("column %s is no field of fadeloop.v1.Figures", fig.Key)
			continue
		}
		if got := fig.Get(f); !proto.Equal(got, e) {
			t.Errorf("column %s reads %v, want %v", fig.Key, got, e)
		}
	}
	for k := range want {
		if !seen[k] {
			t.Errorf("field %s of fadeloop.v1.Figures has no column", k)
		}
	}
	if h := figureCSVHeader(); len(h) != 3*len(figures) || h[0] != figures[0].Key || h[1] != figures[0].Key+"_ci_low" {
		t.Errorf("CSV header %v", h[:3])
	}
}

// TestNoIntervalShownAsDash: an interval that is not available (NaN
// bounds: one replication of a layout too short for one) prints as "–" in
// the run and layout tables, never "[–, –]" or "NaN"; a given one as
// "[lo, hi]".
func TestNoIntervalShownAsDash(t *testing.T) {
	nan := math.NaN()
	if got := Interval(nan, nan, 2); got != "–" {
		t.Errorf("Interval(NaN, NaN) = %q, want –", got)
	}
	if got := Interval(1.25, 1.5, 2); got != "[1.25, 1.50]" {
		t.Errorf("Interval(1.25, 1.5) = %q", got)
	}
	none := func(v float64) *pb.Estimate { return &pb.Estimate{Value: v, CiLow: nan, CiHigh: nan} }
	rep := &pb.RunReport{
		NormalisedScenario: &pb.Scenario{Layout: &pb.Layout{Sites: 1, SectorsPerSite: 1}},
		Layout: &pb.LayoutReport{
			Overall: &pb.LayoutOverall{OtherToOwn: none(0.5), NoiseRiseDb: none(1), OutageProbability: none(0.05),
				SoftHandoverShare: none(0.3), TimeAtMaxPower: none(0), TimeAtMaxEdge: none(0),
				LegShare: []*pb.Estimate{none(0.7)}, OutageByLegs: []*pb.Estimate{none(0.05)}, TimeAtMaxByLegs: []*pb.Estimate{none(0)}},
			Cells: []*pb.LayoutCell{{Name: "A", OtherToOwn: none(0.5), NoiseRiseDb: none(1)}},
		},
	}
	var b strings.Builder
	LayoutTable(&b, rep)
	if s := b.String(); strings.Contains(s, "[–") || strings.Contains(s, "NaN") || !strings.Contains(s, "0.500") {
		t.Errorf("layout table:\n%s", s)
	}
	// The run table points to the notes exactly when an interval is missing.
	for _, withheld := range []bool{true, false} {
		out := none(0.05)
		if !withheld {
			out = &pb.Estimate{Value: 0.05, CiLow: 0.04, CiHigh: 0.06}
		}
		rep.Aggregate = &pb.Figures{Users: 2, OutageProbability: out}
		rep.Notes = []string{"one replication: no intervals: run longer"}
		b.Reset()
		RunTable(&b, rep, false)
		s := b.String()
		if said := strings.Contains(s, "Intervals marked – are not available") && strings.Contains(s, "- one replication: no intervals: run longer"); said != withheld {
			t.Errorf("interval withheld %v, notes printed %v:\n%s", withheld, said, s)
		}
		if strings.Contains(s, "NaN") || strings.Contains(s, "[–") {
			t.Errorf("run table:\n%s", s)
		}
	}
}

// TestJSONWritesZeroValues: the CLI's JSON has every scalar key, also at
// zero (an interval's ci_low of 0, group 0), so a script can read them
// without a missing-key case; unset messages stay out.
func TestJSONWritesZeroValues(t *testing.T) {
	for _, c := range []struct {
		m    interface{ ProtoReflect() protoreflect.Message }
		want []string
	}{
		{&pb.Estimate{Value: 1.5, CiHigh: 2}, []string{`"ci_low": 0`, `"value": 1.5`, `"ci_high": 2`}},
		{&pb.GroupFingers{Taps: 4, Fingers: 2}, []string{`"group": 0`, `"captured_power_db": 0`, `"taps": 4`}},
	} {
		b, err := MarshalJSON(c.m)
		if err != nil {
			t.Fatal(err)
		}
		for _, w := range c.want {
			if !strings.Contains(string(b), w) {
				t.Errorf("%T: JSON lacks %s:\n%s", c.m, w, b)
			}
		}
	}
	b, err := MarshalJSON(&pb.Figures{})
	if err != nil {
		t.Fatal(err)
	}
	if strings.Contains(string(b), "null") || strings.Contains(string(b), "outage_probability") {
		t.Errorf("unset messages written out:\n%s", b)
	}
}

package render

import (
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

package service

import (
	"context"
	"reflect"
	"strings"
	"testing"

	"google.golang.org/protobuf/reflect/protoreflect"

	"github.com/fadeloop/fadeloop/loop/tune"
	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// TestVerdictEnumsMirror checks that tune.Verdict and tune.WarningKind
// carry the proto value names at the same numbers, both ways (the
// conversions in decisionToProto are casts), and that the figure labels
// name the TuneFigures fields in field order.
func TestVerdictEnumsMirror(t *testing.T) {
	vals := pb.Verdict(0).Descriptor().Values()
	for i := range vals.Len() {
		v := vals.Get(i)
		b, _ := tune.Verdict(v.Number()).MarshalText()
		if string(b) != string(v.Name()) {
			t.Errorf("Verdict %d: %s in the proto, %s in tune", v.Number(), v.Name(), b)
		}
	}
	if b, _ := tune.Verdict(vals.Len()).MarshalText(); string(b) != "5" || vals.Len() != 5 {
		t.Errorf("tune has a verdict the proto lacks: %s", b)
	}
	vals = pb.WarningKind(0).Descriptor().Values()
	for i := range vals.Len() {
		v := vals.Get(i)
		b, _ := tune.WarningKind(v.Number()).MarshalText()
		if string(b) != string(v.Name()) {
			t.Errorf("WarningKind %d: %s in the proto, %s in tune", v.Number(), v.Name(), b)
		}
	}
	fields := (&pb.TuneFigures{}).ProtoReflect().Descriptor().Fields()
	labels := tune.FigureLabels()
	k := 0
	for i := range fields.Len() {
		f := fields.Get(i)
		if f.Message() == nil || f.Name() == "other_to_own" { // bler_target, infeasible_replications; f (layout only) has no label
			continue
		}
		if k >= len(labels) || labels[k].Key != string(f.Name()) {
			t.Errorf("figure %d: proto field %s, label %+v", k, f.Name(), labels[min(k, len(labels)-1)])
		}
		k++
	}
	if k != len(labels) {
		t.Errorf("%d estimate fields in TuneFigures, %d labels", k, len(labels))
	}
}

// The new limits are validated on the wire with their field names.
func TestSearchLimitsBadInput(t *testing.T) {
	env := startEnv(t, viaBufconn, Config{})
	c := tinyCapacityRequest(t)
	c.NoiseRiseLimitDb = 41
	_, _, err := capacityCall(context.Background(), env, c)
	wantInvalid(t, err, "noise_rise_limit_db")
	for _, tc := range []struct {
		field string
		set   func(o *pb.Objective)
	}{
		{"objective.noise_rise_limit_db", func(o *pb.Objective) { o.NoiseRiseLimitDb = -1 }},
		{"objective.outage_warning", func(o *pb.Objective) { o.OutageWarning = 1.5 }},
	} {
		r := tinyTuneRequest(t)
		tc.set(r.Objective)
		_, _, err := tuneCall(context.Background(), env, r)
		wantInvalid(t, err, tc.field)
	}
}

// TestSearchFieldNamesMirror checks that the tuner's answers carry the
// proto's field names (json tags against descriptors, both ways,
// recursively), so one figure has one name in Go, the API and the CLI.
// Known differences: Recommendation.axes (Go only: the resolved axes, which
// the request already holds) and wall_time_s (proto only: the call's clock).
func TestSearchFieldNamesMirror(t *testing.T) {
	known := map[string]bool{"axes": true, "wall_time_s": true, "effort.wall_time_s": true}
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
				if known[path+tag] {
					continue
				}
				t.Errorf("%s%s: in tune.%s but not in proto %s", path, tag, gt.Name(), md.FullName())
				continue
			}
			ft := f.Type
			if ft.Kind() == reflect.Pointer {
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Slice {
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Struct && fd.Message() != nil {
				walk(path+tag+".", ft, fd.Message())
			}
		}
		for i := range md.Fields().Len() {
			if n := string(md.Fields().Get(i).Name()); !seen[n] && !known[path+n] {
				t.Errorf("%s%s: in proto %s but not in tune.%s", path, n, md.FullName(), gt.Name())
			}
		}
	}
	walk("", reflect.TypeFor[tune.Recommendation](), (&pb.Recommendation{}).ProtoReflect().Descriptor())
	walk("", reflect.TypeFor[tune.CapacityResult](), (&pb.CapacityResult{}).ProtoReflect().Descriptor())
}

package service

import (
	"context"
	"testing"

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
		if f.Message() == nil { // bler_target, infeasible_replications
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

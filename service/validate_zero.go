package service

import (
	"errors"
	"fmt"

	"buf.build/go/protovalidate"

	"buf.build/gen/go/bufbuild/protovalidate/protocolbuffers/go/buf/validate"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"

	pb "github.com/fadeloop/fadeloop/proto/fadeloop/v1"
)

// zeroNote says what 0 means for a numeric scenario field whose .proto
// rule accepts 0 (e.g. layout.handover.max_active in [0, 6], layout.sites
// in [0, 1, 7, 19]), so a rule that lists 0 among the allowed values does
// not read as if 0 were an ordinary setting: "0 or unset: default N" when
// loop.Scenario.Normalise replaces 0 by N (the one home of the defaults),
// "0 or unset: single cell, no layout" when leaving the field out turns a
// multi-cell scenario into a single-cell one, "" otherwise (0 is an
// ordinary value, e.g. a 0 dB handover window, the rule rejects 0, or the
// field is not in a scenario). req is the validated request and path the
// violation's field path within it.
func (p *protoValidator) zeroNote(req proto.Message, path []*validate.FieldPathElement) string {
	if len(path) == 0 {
		return ""
	}
	parent, fd := walkField(req.ProtoReflect(), path)
	if fd == nil || fd.IsList() || fd.IsMap() || !numericKind(fd.Kind()) {
		return ""
	}
	// Does the rule accept 0? Field rules are the field's own: an empty
	// message of the enclosing type (the field 0) tells, without copying
	// the request.
	var ve *protovalidate.ValidationError
	if err := p.v.Validate(parent.Type().New().Interface()); errors.As(err, &ve) {
		for _, v := range ve.Violations {
			if protovalidate.FieldPathString(v.Proto.GetField()) == string(fd.Name()) {
				return ""
			}
		}
	}
	// The scenario the field is in, and the field's path below it.
	var scMsg *pb.Scenario
	var below []*validate.FieldPathElement
	m := req.ProtoReflect()
	for i := 0; ; i++ {
		if s, ok := m.Interface().(*pb.Scenario); ok {
			scMsg, below = s, path[i:]
		}
		if i == len(path)-1 {
			break
		}
		var ok bool
		if m, ok = stepInto(m, path[i]); !ok {
			return ""
		}
	}
	if scMsg == nil {
		return ""
	}
	// A scenario holding only what decides the defaults (single or
	// multi-cell) and the path to the field, left at 0, normalised.
	multi := scMsg.GetLayout().GetSites() != 0
	skel := &pb.Scenario{}
	if multi {
		skel.Layout = &pb.Layout{Sites: scMsg.GetLayout().GetSites()}
	}
	sm := skel.ProtoReflect()
	for _, el := range below[:len(below)-1] {
		if sm = mutableStep(sm, el); sm == nil {
			return ""
		}
	}
	sm.Clear(fd)
	sc := ScenarioFromProto(skel)
	single := !sc.MultiCell()
	sc.Normalise()
	if bp, bfd := walkField(ScenarioToProto(sc).ProtoReflect(), below); bfd != nil {
		if v := bp.Get(bfd); !isZero(v, bfd.Kind()) {
			return fmt.Sprintf("0 or unset: default %v", v.Interface())
		}
	}
	if multi && single {
		return "0 or unset: single cell, no layout"
	}
	return ""
}

// mutableStep returns the message path element el of m holds, creating
// it (and list elements up to its index) when absent; nil when el is not
// a message field.
func mutableStep(m protoreflect.Message, el *validate.FieldPathElement) protoreflect.Message {
	fd := m.Descriptor().Fields().ByNumber(protoreflect.FieldNumber(el.GetFieldNumber()))
	if fd == nil || fd.Kind() != protoreflect.MessageKind || fd.IsMap() {
		return nil
	}
	if !fd.IsList() {
		return m.Mutable(fd).Message()
	}
	i, ok := el.GetSubscript().(*validate.FieldPathElement_Index)
	if !ok || i.Index > 1<<16 {
		return nil
	}
	l := m.Mutable(fd).List()
	for uint64(l.Len()) <= i.Index {
		l.Append(l.NewElement())
	}
	return l.Get(int(i.Index)).Message()
}

// walkField follows path from m and returns the message holding the last
// field and that field's descriptor; an invalid message and nil when the
// path does not lead to a set field of a message.
func walkField(m protoreflect.Message, path []*validate.FieldPathElement) (protoreflect.Message, protoreflect.FieldDescriptor) {
	for i, el := range path {
		fd := m.Descriptor().Fields().ByNumber(protoreflect.FieldNumber(el.GetFieldNumber()))
		if fd == nil {
			return nil, nil
		}
		if i == len(path)-1 {
			return m, fd
		}
		var ok bool
		if m, ok = stepInto(m, el); !ok {
			return nil, nil
		}
	}
	return nil, nil
}

// stepInto returns the message that path element el (a message field, or
// an element of a list of messages) of m holds.
func stepInto(m protoreflect.Message, el *validate.FieldPathElement) (protoreflect.Message, bool) {
	fd := m.Descriptor().Fields().ByNumber(protoreflect.FieldNumber(el.GetFieldNumber()))
	if fd == nil || fd.Kind() != protoreflect.MessageKind || fd.IsMap() {
		return nil, false
	}
	if fd.IsList() {
		l := m.Get(fd).List()
		i, ok := el.GetSubscript().(*validate.FieldPathElement_Index)
		if !ok || int(i.Index) >= l.Len() {
			return nil, false
		}
		return l.Get(int(i.Index)).Message(), true
	}
	if !m.Has(fd) {
		return nil, false
	}
	return m.Get(fd).Message(), true
}

func numericKind(k protoreflect.Kind) bool {
	switch k {
	case protoreflect.Int32Kind, protoreflect.Sint32Kind, protoreflect.Sfixed32Kind,
		protoreflect.Int64Kind, protoreflect.Sint64Kind, protoreflect.Sfixed64Kind,
		protoreflect.Uint32Kind, protoreflect.Fixed32Kind, protoreflect.Uint64Kind, protoreflect.Fixed64Kind,
		protoreflect.FloatKind, protoreflect.DoubleKind:
		return true
	}
	return false
}

func isZero(v protoreflect.Value, k protoreflect.Kind) bool {
	switch k {
	case protoreflect.FloatKind, protoreflect.DoubleKind:
		return v.Float() == 0
	case protoreflect.Uint32Kind, protoreflect.Fixed32Kind, protoreflect.Uint64Kind, protoreflect.Fixed64Kind:
		return v.Uint() == 0
	}
	return v.Int() == 0
}

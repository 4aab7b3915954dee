package service

import (
	"errors"
	"fmt"
	"strings"

	"buf.build/go/protovalidate"
	"google.golang.org/protobuf/proto"
	"google.golang.org/protobuf/reflect/protoreflect"
)

// protoValidator checks the rules written in the .proto files.
type protoValidator struct {
	v protovalidate.Validator
}

func newProtoValidator() (*protoValidator, error) {
	v, err := protovalidate.New()
	if err != nil {
		return nil, fmt.Errorf("protovalidate: %w", err)
	}
	return &protoValidator{v: v}, nil
}

// check returns every violation of msg's .proto rules, with field paths
// prefixed by prefix ("" or e.g. "scenario."), or nil. A rule that cannot be
// evaluated is reported as a violation of the message itself rather than
// dropped.
func (p *protoValidator) check(msg proto.Message, prefix string) []Violation {
	err := p.v.Validate(msg)
	if err == nil {
		return nil
	}
	var ve *protovalidate.ValidationError
	if !errors.As(err, &ve) {
		field := trimDot(prefix)
		if field == "" {
			field = string(msg.ProtoReflect().Descriptor().Name())
		}
		return []Violation{{Field: field, Description: "cannot be validated: " + err.Error()}}
	}
	out := make([]Violation, 0, len(ve.Violations))
	for i, v := range ve.Violations {
		path := protovalidate.FieldPathString(v.Proto.GetField())
		field := prefix + path
		if path == "" {
			field = trimDot(prefix)
		}
		desc := v.Proto.GetMessage()
		if ed := enumOf(v.FieldDescriptor); ed != nil && strings.HasPrefix(v.Proto.GetRuleId(), "enum.") {
			desc = enumRule(ed, v.FieldValue)
		} else if desc != "" {
			zero := ""
			if i < MaxViolations { // the rest are not shown (capViolations)
				zero = p.zeroNote(msg, v.Proto.GetField().GetElements())
			}
			desc = describeValue(desc, zero, v.FieldDescriptor, v.FieldValue)
		}
		if desc == "" {
			// The rule's id (e.g. "double.gte_lte") is shown only when
			// the rule has no message: it is the validator's name for the
			// rule, not words for the user.
			desc = v.Proto.GetRuleId()
		}
		out = append(out, Violation{Field: field, Description: desc})
	}
	return out
}

// enumOf returns the enum type of an enum field (or list of enums), nil
// otherwise.
func enumOf(fd protoreflect.FieldDescriptor) protoreflect.EnumDescriptor {
	if fd == nil || fd.Kind() != protoreflect.EnumKind {
		return nil
	}
	return fd.Enum()
}

// enumRule says which values an enum field accepts: every defined value but
// the _UNSPECIFIED one, which means "use the documented default" (see
// loop.Scenario.Normalise), and the number that was given.
func enumRule(ed protoreflect.EnumDescriptor, got protoreflect.Value) string {
	var names []string
	vals := ed.Values()
	for i := range vals.Len() {
		if v := vals.Get(i); v.Number() != 0 {
			names = append(names, string(v.Name()))
		}
	}
	list := strings.Join(names, ", ")
	if n := len(names); n > 1 {
		list = strings.Join(names[:n-1], ", ") + " or " + names[n-1]
	}
	g := "an unknown value"
	if got.IsValid() {
		if n, ok := got.Interface().(protoreflect.EnumNumber); ok {
			g = fmt.Sprintf("%d, not a defined value", n)
		}
	}
	return fmt.Sprintf("must be one of %s (or unset for the default), got %s", list, g)
}

// describeValue completes a .proto rule's message for a scalar field: an
// allowed-value list shows 0 only through the note saying what 0 means
// ("must be in list [1, 7, 19] (0 or unset: single cell, no layout)"),
// a range that admits 0 carries the note, and the value given follows
// ("…, got 5").
func describeValue(desc, zero string, fd protoreflect.FieldDescriptor, got protoreflect.Value) string {
	if zero != "" {
		desc = strings.Replace(desc, "[0, ", "[", 1) + " (" + zero + ")"
	}
	if fd != nil && !fd.IsList() && !fd.IsMap() && numericKind(fd.Kind()) && got.IsValid() {
		desc += fmt.Sprintf(", got %v", got.Interface())
	}
	return desc
}

func trimDot(s string) string {
	if len(s) > 0 && s[len(s)-1] == '.' {
		return s[:len(s)-1]
	}
	return s
}

package service

import (
	"errors"
	"fmt"

	"buf.build/go/protovalidate"
	"google.golang.org/protobuf/proto"
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
	for _, v := range ve.Violations {
		path := protovalidate.FieldPathString(v.Proto.GetField())
		field := prefix + path
		if path == "" {
			field = trimDot(prefix)
		}
		desc := v.Proto.GetMessage()
		if id := v.Proto.GetRuleId(); id != "" {
			if desc == "" {
				desc = id
			} else {
				desc += " [" + id + "]"
			}
		}
		out = append(out, Violation{Field: field, Description: desc})
	}
	return out
}

func trimDot(s string) string {
	if len(s) > 0 && s[len(s)-1] == '.' {
		return s[:len(s)-1]
	}
	return s
}

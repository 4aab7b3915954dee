package client

import (
	"context"
	"errors"
	"fmt"
	"strings"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
)

// FieldViolation is one broken rule of a request as the server reported
// it: the field path with proto field names (e.g.
// "scenario.groups[0].speeds[0].speed_kmh") and the rule.
type FieldViolation struct {
	Field string
	Rule  string
}

// String is "field: rule".
func (v FieldViolation) String() string { return v.Field + ": " + v.Rule }

// InvalidInputError is an INVALID_ARGUMENT answer with every field
// violation of the server's google.rpc.BadRequest detail. Its Error text
// lists them one per line as "field: rule".
type InvalidInputError struct {
	// Message is the status message.
	Message string
	// Violations lists every broken rule, in the server's order.
	Violations []FieldViolation
	status     *status.Status
}

// Error lists the violations, one "field: rule" per line.
func (e *InvalidInputError) Error() string {
	if len(e.Violations) == 0 {
		return "invalid input: " + e.Message
	}
	var b strings.Builder
	b.WriteString("invalid input:")
	for _, v := range e.Violations {
		b.WriteString("\n  ")
		b.WriteString(v.String())
	}
	return b.String()
}

// GRPCStatus lets status.FromError see the original status.
func (e *InvalidInputError) GRPCStatus() *status.Status { return e.status }

// AsInvalidInput returns the InvalidInputError in err's chain, if any.
func AsInvalidInput(err error) (*InvalidInputError, bool) {
	var e *InvalidInputError
	ok := errors.As(err, &e)
	return e, ok
}

// IsUnreachable reports whether err means that the server could not be
// reached (UNAVAILABLE: refused, unresolvable, TLS handshake failed, gone
// away).
func IsUnreachable(err error) bool {
	if err == nil {
		return false
	}
	st, ok := status.FromError(err)
	return ok && st.Code() == codes.Unavailable
}

// IsCanceled reports whether err is a cancelled call (the caller's context,
// e.g. Ctrl-C).
func IsCanceled(err error) bool {
	if errors.Is(err, context.Canceled) {
		return true
	}
	st, ok := status.FromError(err)
	return ok && st.Code() == codes.Canceled
}

// wrapError turns a gRPC status error into this package's error types:
// INVALID_ARGUMENT becomes *InvalidInputError with the field violations;
// other statuses are returned unchanged (use status.FromError on them).
func wrapError(err error) error {
	if err == nil {
		return nil
	}
	st, ok := status.FromError(err)
	if !ok {
		return err
	}
	if st.Code() != codes.InvalidArgument {
		return err
	}
	e := &InvalidInputError{Message: st.Message(), status: st}
	for _, d := range st.Details() {
		if br, ok := d.(*errdetails.BadRequest); ok {
			for _, fv := range br.GetFieldViolations() {
				e.Violations = append(e.Violations, FieldViolation{Field: fv.GetField(), Rule: fv.GetDescription()})
			}
		}
	}
	return e
}

// describeStatus formats a non-nil error for people: the code name and the
// message for gRPC statuses.
func describeStatus(err error) string {
	st, ok := status.FromError(err)
	if !ok {
		return err.Error()
	}
	return fmt.Sprintf("%s: %s", st.Code(), st.Message())
}

// Describe formats err for a person at a terminal: field violations one per
// line, other statuses as "Code: message".
func Describe(err error) string {
	if e, ok := AsInvalidInput(err); ok {
		return e.Error()
	}
	return describeStatus(err)
}

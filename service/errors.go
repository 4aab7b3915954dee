package service

import (
	"context"
	"errors"
	"fmt"
	"sort"
	"strings"
	"time"

	"google.golang.org/genproto/googleapis/rpc/errdetails"
	"google.golang.org/grpc/codes"
	"google.golang.org/grpc/status"
	"google.golang.org/protobuf/types/known/durationpb"

	"github.com/fadeloop/fadeloop/fading"
	"github.com/fadeloop/fadeloop/loop"
)

// Violation is one broken rule of a request: the field path (proto field
// names from the request message, e.g. "scenario.groups[0].count") and a
// description of the rule.
type Violation struct {
	Field       string
	Description string
}

// MaxViolations caps the field violations of one error: the first
// MaxViolations (sorted by field path) are listed, then one entry at
// field "" counts the rest, so that no rejection outgrows a message (a
// request of 262 000 bad distances once broke the connection).
const MaxViolations = 50

// apiPath maps a field path reported by the domain (package loop, tune or
// fading; proto field paths relative to the domain object) to the path in
// the request: prefix (where the domain object sits, e.g. "scenario.",
// "base.", "") before it, except the engine's trace options ("trace.…"),
// which the request carries at "traces.…". It is the one mapping from
// domain paths to API paths; every handler uses it through violationsOf.
func apiPath(prefix, field string) string {
	if rest, ok := strings.CutPrefix(field, "trace."); ok {
		return "traces." + rest
	}
	return prefix + field
}

// violationsOf returns the field violations err carries (loop.Violations
// or a *fading.ParamError) at their request paths (apiPath), and whether
// it carries any.
func violationsOf(err error, prefix string) ([]Violation, bool) {
	var lvs loop.Violations
	if errors.As(err, &lvs) {
		out := make([]Violation, len(lvs))
		for i, v := range lvs {
			out[i] = Violation{Field: apiPath(prefix, v.Field), Description: v.Rule}
		}
		return out, true
	}
	var pe *fading.ParamError
	if errors.As(err, &pe) {
		return []Violation{{Field: apiPath(prefix, pe.Path), Description: pe.Rule}}, true
	}
	return nil, false
}

// capViolations keeps the first MaxViolations of vs and adds one entry
// counting the rest.
func capViolations(vs []Violation) []Violation {
	if len(vs) <= MaxViolations {
		return vs
	}
	rest := len(vs) - MaxViolations
	return append(vs[:MaxViolations:MaxViolations], Violation{Field: "",
		Description: fmt.Sprintf("%d more violations not listed (at most %d are)", rest, MaxViolations)})
}

// invalidArgument returns an INVALID_ARGUMENT status carrying the
// violations as google.rpc.BadRequest field violations: sorted by field
// path, de-duplicated (same field and description) and capped at
// MaxViolations plus one entry counting the rest.
func invalidArgument(vs []Violation) error {
	vs = capViolations(dedupe(vs))
	br := &errdetails.BadRequest{}
	var msg strings.Builder
	msg.WriteString("invalid request:")
	for i, v := range vs {
		br.FieldViolations = append(br.FieldViolations, &errdetails.BadRequest_FieldViolation{
			Field:       v.Field,
			Description: v.Description,
		})
		if i < 8 {
			fmt.Fprintf(&msg, " %s: %s;", v.Field, v.Description)
		}
	}
	if len(vs) > 8 {
		fmt.Fprintf(&msg, " and %d more", len(vs)-8)
	}
	st := status.New(codes.InvalidArgument, strings.TrimSuffix(msg.String(), ";"))
	if withDetails, err := st.WithDetails(br); err == nil {
		st = withDetails
	}
	return st.Err()
}

func dedupe(vs []Violation) []Violation {
	out := append([]Violation(nil), vs...)
	sort.SliceStable(out, func(i, j int) bool { return out[i].Field < out[j].Field })
	k := 0
	for i, v := range out {
		if i > 0 && v == out[k-1] {
			continue
		}
		out[k] = v
		k++
	}
	return out[:k]
}

// costExceeded returns RESOURCE_EXHAUSTED naming the cost bound.
func costExceeded(what string, cost, bound int64) error {
	st := status.New(codes.ResourceExhausted, fmt.Sprintf(
		"%s costs %d tap-slots, above the server's cost bound max_cost = %d tap-slots", what, cost, bound))
	if d, err := st.WithDetails(&errdetails.QuotaFailure{Violations: []*errdetails.QuotaFailure_Violation{{
		Subject:     "max_cost",
		Description: fmt.Sprintf("request cost %d tap-slots > bound %d", cost, bound),
	}}}); err == nil {
		st = d
	}
	return st.Err()
}

// overloaded returns RESOURCE_EXHAUSTED with a RetryInfo.
func overloaded(msg string, retry time.Duration) error {
	st := status.New(codes.ResourceExhausted, msg)
	if d, err := st.WithDetails(&errdetails.RetryInfo{RetryDelay: durationpb.New(retry)}); err == nil {
		st = d
	}
	return st.Err()
}

// fromContext maps a context error to its status (CANCELED or
// DEADLINE_EXCEEDED); any other error becomes INTERNAL unless it already is
// a status.
func statusFromError(ctx context.Context, err error) error {
	if err == nil {
		return nil
	}
	if _, ok := status.FromError(err); ok {
		return err
	}
	switch {
	case errors.Is(err, context.DeadlineExceeded):
		return status.Error(codes.DeadlineExceeded, err.Error())
	case errors.Is(err, context.Canceled):
		return status.Error(codes.Canceled, err.Error())
	}
	if ctxErr := ctx.Err(); ctxErr != nil {
		return statusFromError(context.Background(), ctxErr)
	}
	return status.Error(codes.Internal, err.Error())
}

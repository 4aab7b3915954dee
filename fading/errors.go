package fading

import (
	"errors"
	"fmt"
	"math"
	"strings"
	"unicode"
)

// ParamError reports a bad input parameter: Path names it as an API field
// path (the snake_case proto path, e.g. "profile.taps[2].delay_ns",
// "doppler_hz", "ref_loss_db"), Param as a Go field path (e.g.
// "Profile.Taps[2].DelayNs") or argument name (e.g. "DistanceM"), and Rule
// states the rule it broke, with the valid range. Every constructor and
// validator of package fading returns a *ParamError (or an error wrapping
// one) for bad input; none of them panics. Callers that place a fading
// value inside a request prefix Path with where it sits there.
type ParamError struct {
	Param string // offending parameter, Go field path
	Path  string // the same parameter as a snake_case API field path
	Rule  string // the rule it broke, e.g. "must be in [150e6, 1500e6] Hz"
}

// Error returns "<path>: <rule>".
func (e *ParamError) Error() string { return e.Path + ": " + e.Rule }

// paramErr builds a *ParamError with a formatted rule.
func paramErr(param, format string, args ...any) error {
	return &ParamError{Param: param, Path: APIPath(param), Rule: fmt.Sprintf(format, args...)}
}

// withPrefix returns err with prefix+"." prepended to the parameter name of
// the *ParamError it carries; other errors are returned unchanged.
func withPrefix(prefix string, err error) error {
	var pe *ParamError
	if err == nil || !errors.As(err, &pe) {
		return err
	}
	p := prefix + "." + pe.Param
	return &ParamError{Param: p, Path: APIPath(p), Rule: pe.Rule}
}

// APIPath converts a Go field path ("Profile.Taps[2].DelayNs", "RicianKDB",
// "LOSAngleRad") to the snake_case API path ("profile.taps[2].delay_ns",
// "rician_k_db", "los_angle_rad"): words split at case changes, an acronym
// kept whole, "DB" (decibel) always its own word; indices kept.
func APIPath(goPath string) string {
	var b strings.Builder
	r := []rune(goPath)
	for i := 0; i < len(r); i++ {
		c := r[i]
		if !unicode.IsUpper(c) {
			b.WriteRune(c)
			continue
		}
		prevLowerOrDigit := i > 0 && (unicode.IsLower(r[i-1]) || unicode.IsDigit(r[i-1]))
		prevUpper := i > 0 && unicode.IsUpper(r[i-1])
		nextLower := i+1 < len(r) && unicode.IsLower(r[i+1])
		startDB := c == 'D' && i+1 < len(r) && r[i+1] == 'B' && (i+2 == len(r) || !unicode.IsLower(r[i+2]))
		afterDB := c == 'B' && i > 0 && r[i-1] == 'D'
		if (prevLowerOrDigit || (prevUpper && (nextLower || startDB) && !afterDB)) && b.Len() > 0 {
			b.WriteByte('_')
		}
		b.WriteRune(unicode.ToLower(c))
	}
	return b.String()
}

// finite reports whether x is neither NaN nor ±Inf.
func finite(x float64) bool { return !math.IsNaN(x) && !math.IsInf(x, 0) }

// checkRange returns a *ParamError unless lo <= x <= hi (x finite).
func checkRange(param string, x, lo, hi float64, unit string) error {
	if !finite(x) || x < lo || x > hi {
		return paramErr(param, "must be in [%g, %g] %s, got %g", lo, hi, unit, x)
	}
	return nil
}

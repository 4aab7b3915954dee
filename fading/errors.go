package fading

import (
	"errors"
	"fmt"
	"math"
)

// ParamError reports a bad input parameter: Param names the parameter (a Go
// field path such as "Profile.Taps[2].DelayNs" or an argument name such as
// "DistanceM") and Rule states the rule it broke, with the valid range.
// Every constructor and validator of package fading returns a *ParamError
// (or an error wrapping one) for bad input; none of them panics.
type ParamError struct {
	Param string // offending parameter, Go field path
	Rule  string // the rule it broke, e.g. "must be in [150e6, 1500e6] Hz"
}

// Error returns "<param>: <rule>".
func (e *ParamError) Error() string { return e.Param + ": " + e.Rule }

// paramErr builds a *ParamError with a formatted rule.
func paramErr(param, format string, args ...any) error {
	return &ParamError{Param: param, Rule: fmt.Sprintf(format, args...)}
}

// withPrefix returns err with prefix+"." prepended to the parameter name of
// the *ParamError it carries; other errors are returned unchanged.
func withPrefix(prefix string, err error) error {
	var pe *ParamError
	if err == nil || !errors.As(err, &pe) {
		return err
	}
	return &ParamError{Param: prefix + "." + pe.Param, Rule: pe.Rule}
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

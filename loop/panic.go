package loop

import (
	"fmt"
	"runtime/debug"
)

// PanicError is a programmer error (a panic) recovered in one of the
// engine's worker goroutines and returned as the run's error, with the
// stack of the goroutine that panicked, so that a server embedding the
// engine reports an internal error instead of crashing.
type PanicError struct {
	Value any    // the value passed to panic
	Stack []byte // the stack of the panicking goroutine
}

// Error reports the panic value; the stack is in Stack.
func (e *PanicError) Error() string { return fmt.Sprintf("internal error (panic): %v", e.Value) }

// NewPanicError wraps a recovered panic value with the current stack; for
// use by packages that run engine work on goroutines of their own.
func NewPanicError(v any) *PanicError { return &PanicError{Value: v, Stack: debug.Stack()} }

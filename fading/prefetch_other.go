//go:build !amd64 || purego

package fading

import "unsafe"

// prefetchLines does nothing off amd64 and with the purego build tag.
func prefetchLines(p unsafe.Pointer, n int) {}

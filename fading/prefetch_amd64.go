//go:build amd64 && !purego

package fading

import "unsafe"

// prefetchLines hints the CPU to bring the n 64-byte lines from p into
// its caches (prefetch_amd64.s; no effect on any result).
//
//go:noescape
func prefetchLines(p unsafe.Pointer, n int)

package fading

import "math/rand/v2"

// StreamKind names the process a random stream feeds, so that every process
// of every user draws from its own independent stream (see NewStream).
type StreamKind uint32

// Stream kinds used by package fading. Values >= 100 are reserved for
// package loop's own kinds.
const (
	StreamTap       StreamKind = 1 // fading process of one tap; index = tap number
	StreamShadowing StreamKind = 2 // log-normal shadowing of a link
	StreamLOS       StreamKind = 3 // phase of the line-of-sight component
)

// splitmix64 is the finaliser of Steele, Lea & Flood's SplitMix64 generator
// (OOPSLA 2014), used here as a bijective 64-bit hash.
func splitmix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// NewStream returns the deterministic random stream of process (user, index,
// kind) of a run seeded with seed: a math/rand/v2 PCG generator whose two
// 64-bit state words are a SplitMix64 hash chain of (seed, user, index,
// kind). Different (user, index, kind) triples give streams that are
// independent for all practical purposes; identical arguments give identical
// streams, whatever the goroutine or GOMAXPROCS. Negative user or index
// values are allowed (they hash like their two's-complement bit patterns).
func NewStream(seed uint64, user, index int, kind StreamKind) *rand.Rand {
	h := splitmix64(seed)
	h = splitmix64(h ^ uint64(user))
	h = splitmix64(h ^ uint64(index))
	h = splitmix64(h ^ uint64(kind))
	s1 := splitmix64(h ^ 0x5851f42d4c957f2d)
	s2 := splitmix64(h ^ 0x14057b7ef767814f)
	return rand.New(rand.NewPCG(s1, s2))
}

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

// splitMixGamma is SplitMix64's increment, the odd integer nearest
// 2^64/φ (Steele, Lea & Flood, "Fast splittable pseudorandom number
// generators", OOPSLA 2014).
const splitMixGamma = 0x9e3779b97f4a7c15

// SplitMix64 returns output n (n = 0, 1, ...) of the SplitMix64 generator
// started at state seed: the finaliser (Stafford's Mix13, as in Steele, Lea
// & Flood, OOPSLA 2014) of seed + (n+1)·0x9E3779B97F4A7C15. It is the one
// SplitMix64 of the module: seeds derived from seeds (sweep points,
// replications) and the hash chain of NewStream all use it.
func SplitMix64(seed, n uint64) uint64 {
	z := seed + (n+1)*splitMixGamma
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// splitmix64 is SplitMix64's first output from state x, used as a bijective
// 64-bit hash.
func splitmix64(x uint64) uint64 { return SplitMix64(x, 0) }

// NewStream returns the deterministic random stream of process (user, index,
// kind) of a run seeded with seed: a math/rand/v2 PCG generator whose two
// 64-bit state words are a SplitMix64 hash chain of (seed, user, index,
// kind). Different (user, index, kind) triples give streams that are
// independent for all practical purposes; identical arguments give identical
// streams, whatever the goroutine or GOMAXPROCS. Negative user or index
// values are allowed (they hash like their two's-complement bit patterns).
func NewStream(seed uint64, user, index int, kind StreamKind) *rand.Rand {
	h := streamHash(seed, user, index, kind)
	s1 := splitmix64(h ^ 0x5851f42d4c957f2d)
	s2 := splitmix64(h ^ 0x14057b7ef767814f)
	return rand.New(rand.NewPCG(s1, s2))
}

// streamHash is the SplitMix64 hash chain of (seed, user, index, kind) that
// seeds every stream (NewStream, NewFastStream).
func streamHash(seed uint64, user, index int, kind StreamKind) uint64 {
	h := splitmix64(seed)
	h = splitmix64(h ^ uint64(user))
	h = splitmix64(h ^ uint64(index))
	return splitmix64(h ^ uint64(kind))
}

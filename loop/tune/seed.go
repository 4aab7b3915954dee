package tune

import "github.com/fadeloop/fadeloop/fading"

// SeedMode says which seed each sweep point runs with. The numbers are
// those of the fadeloop.v1 SeedMode enum.
type SeedMode int

const (
	// SeedModeUnspecified is not a valid mode.
	SeedModeUnspecified SeedMode = 0
	// SeedModeCommon runs every point with the base scenario's run.seed
	// (common random numbers: points are paired).
	SeedModeCommon SeedMode = 1
	// SeedModePerPoint runs point i with PointSeed(run.seed, i):
	// independent points.
	SeedModePerPoint SeedMode = 2
)

// splitMixGamma is SplitMix64's increment, the odd integer nearest
// 2^64/φ (Steele, Lea & Flood, "Fast splittable pseudorandom number
// generators", OOPSLA 2014).
const splitMixGamma = 0x9E3779B97F4A7C15

// SplitMix64 returns output n (n = 0, 1, ...) of the SplitMix64 generator
// started at state seed: the finaliser (Stafford's Mix13 variant, as in
// Steele, Lea & Flood, OOPSLA 2014) of seed + (n+1)·0x9E3779B97F4A7C15.
// It is the one SplitMix64 of the module for deriving seeds from seeds.
// (fading.NewStream hashes (seed, user, index, kind) into the state of a
// PCG stream with the same finaliser; that is a different concept, the
// state of one random stream, and stays private to package fading.)
func SplitMix64(seed uint64, n uint64) uint64 {
	z := seed + (n+1)*splitMixGamma
	z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9
	z = (z ^ (z >> 27)) * 0x94D049BB133111EB
	return z ^ (z >> 31)
}

// PointSeed is the seed of sweep point index under mode: the base seed
// for SeedModeCommon, SplitMix64(seed, index) for SeedModePerPoint.
func PointSeed(seed uint64, index int64, mode SeedMode) uint64 {
	if mode != SeedModePerPoint {
		return seed
	}
	return SplitMix64(seed, uint64(index))
}

// streamReplicationSeed is the stream kind of the per-replication seeds.
const streamReplicationSeed fading.StreamKind = 901

// ReplicationSeed is the seed of replication r under condition c of a
// search seeded with seed: the first Uint64 of fading.NewStream(seed, c, r,
// 901). Every candidate under condition c uses it for replication r (common
// random numbers), and so does the fixed-power baseline; the capacity search
// uses condition 0 for every user count.
func ReplicationSeed(seed uint64, c, r int) uint64 {
	return fading.NewStream(seed, c, r, streamReplicationSeed).Uint64()
}

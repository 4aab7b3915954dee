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

// PointSeed is the seed of sweep point index under mode: the base seed
// for SeedModeCommon, fading.SplitMix64(seed, index) for SeedModePerPoint.
func PointSeed(seed uint64, index int64, mode SeedMode) uint64 {
	if mode != SeedModePerPoint {
		return seed
	}
	return fading.SplitMix64(seed, uint64(index))
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

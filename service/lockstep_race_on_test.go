//go:build race

package service

// lockstepRace reports a -race build: the race detector drops sync.Pool
// items at random, so allocation counts of gRPC's pooled paths vary.
const lockstepRace = true

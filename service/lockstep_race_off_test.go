//go:build !race

package service

// lockstepRace reports a -race build (see lockstep_race_on_test.go).
const lockstepRace = false

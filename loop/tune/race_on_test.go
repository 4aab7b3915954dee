//go:build race

package tune

// raceEnabled reports a -race build: the slowest real-engine tests then
// run fewer seeds, so that `go test -short -race` stays quick (as in
// package fading).
const raceEnabled = true

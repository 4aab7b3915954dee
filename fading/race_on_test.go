//go:build race

package fading

// raceEnabled reports a -race build: the statistical tests then use their
// smaller CI sizes so that `go test -short -race` stays within seconds.
const raceEnabled = true

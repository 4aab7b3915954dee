//go:build race

package multicell

// raceEnabled reports a -race build.
const raceEnabled = true

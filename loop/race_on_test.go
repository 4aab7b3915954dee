//go:build race

package loop

// raceEnabled reports a -race build: statistical tests shrink their sizes
// so that `go test -short -race` stays within CI time.
const raceEnabled = true

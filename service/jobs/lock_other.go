//go:build !unix

package jobs

// lockStore is a no-op where flock is not available.
func lockStore(string) (func(), error) { return func() {}, nil }

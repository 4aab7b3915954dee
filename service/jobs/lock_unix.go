//go:build unix

package jobs

import (
	"fmt"
	"os"
	"path/filepath"
	"syscall"
)

// lockStore takes an exclusive advisory lock on dir/fadeloop.lock, so that
// two processes never run servers on one store; unlock releases it (the
// kernel also releases it when the process dies, even by SIGKILL).
func lockStore(dir string) (unlock func(), err error) {
	f, err := os.OpenFile(filepath.Join(dir, "fadeloop.lock"), os.O_CREATE|os.O_RDWR, 0o600)
	if err != nil {
		return nil, fmt.Errorf("jobs: queue store lock: %w", err)
	}
	if err := syscall.Flock(int(f.Fd()), syscall.LOCK_EX|syscall.LOCK_NB); err != nil {
		f.Close()
		return nil, fmt.Errorf("%w: the queue store %s is in use by another fadeloop process (the same job running elsewhere: wait for it, or give another store directory)", ErrStoreInUse, dir)
	}
	return func() {
		_ = syscall.Flock(int(f.Fd()), syscall.LOCK_UN)
		f.Close()
	}, nil
}

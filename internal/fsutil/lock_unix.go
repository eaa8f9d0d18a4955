//go:build linux || darwin || freebsd || netbsd || openbsd || dragonfly

package fsutil

import (
	"fmt"
	"os"
	"syscall"
)

// lockDir takes an exclusive advisory lock (flock) on the directory dir,
// waiting for it; the kernel drops it when the process dies, so a killed
// run never leaves a stale lock.
func lockDir(dir string) (unlock func(), err error) {
	f, err := os.Open(dir)
	if err != nil {
		return nil, err
	}
	for {
		err = syscall.Flock(int(f.Fd()), syscall.LOCK_EX)
		if err != syscall.EINTR {
			break
		}
	}
	if err != nil {
		f.Close()
		return nil, fmt.Errorf("locking %s: %w", dir, err)
	}
	return func() { f.Close() }, nil // closing the descriptor drops the lock
}

func ignoreDirSyncError(error) bool { return false }

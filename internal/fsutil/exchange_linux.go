package fsutil

import (
	"errors"
	"fmt"

	"golang.org/x/sys/unix"
)

// exchangeDirs swaps the directories a and b in one step (renameat2 with
// RENAME_EXCHANGE, Linux 3.15 and later); errNoExchange where the kernel
// or the file system cannot.
func exchangeDirs(a, b string) error {
	err := unix.Renameat2(unix.AT_FDCWD, a, unix.AT_FDCWD, b, unix.RENAME_EXCHANGE)
	switch {
	case err == nil:
		return nil
	case errors.Is(err, unix.ENOSYS), errors.Is(err, unix.EINVAL), errors.Is(err, unix.EOPNOTSUPP):
		return errNoExchange
	}
	return fmt.Errorf("exchanging %s and %s: %w", a, b, err)
}

package pipit

import (
	"errors"
	"io/fs"
	"os"

	"golang.org/x/sys/unix"
)

// swapInto puts the folder src in place of dst. An existing dst is
// exchanged with src in one step (renameat2 with RENAME_EXCHANGE, Linux
// 3.15 on), so dst is never missing and never mixed; src then holds the
// previous set, which the caller removes. Where the file system cannot
// exchange, it falls back to two renames (see swapByRenames).
func swapInto(src, dst string) error {
	if _, err := os.Stat(dst); errors.Is(err, fs.ErrNotExist) {
		return os.Rename(src, dst)
	}
	err := unix.Renameat2(unix.AT_FDCWD, src, unix.AT_FDCWD, dst, unix.RENAME_EXCHANGE)
	if err == nil {
		return nil
	}
	if errors.Is(err, unix.EINVAL) || errors.Is(err, unix.ENOSYS) || errors.Is(err, unix.EXDEV) {
		return swapByRenames(src, dst)
	}
	return &os.LinkError{Op: "exchange", Old: src, New: dst, Err: err}
}

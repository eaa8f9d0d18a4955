//go:build !linux

package pipit

import (
	"errors"
	"io/fs"
	"os"
)

// swapInto puts the folder src in place of dst by two renames (see
// swapByRenames); src then holds nothing the caller needs.
func swapInto(src, dst string) error {
	if _, err := os.Stat(dst); errors.Is(err, fs.ErrNotExist) {
		return os.Rename(src, dst)
	}
	return swapByRenames(src, dst)
}

package pipit

import (
	"os"
	"path/filepath"
)

// swapByRenames moves dst aside to ".BASE"+exportOld+suffix, src onto
// dst, and the old set back into src's place for the caller to remove.
// Killed between the first two renames, dst is missing and the previous
// set waits beside it under the exportOld name; prepareExportDir puts it
// back before the next export.
func swapByRenames(src, dst string) error {
	old := filepath.Join(filepath.Dir(dst), "."+filepath.Base(dst)+exportOld+filepath.Base(src))
	if err := os.Rename(dst, old); err != nil {
		return err
	}
	if err := os.Rename(src, dst); err != nil {
		os.Rename(old, dst)
		return err
	}
	return os.Rename(old, src)
}

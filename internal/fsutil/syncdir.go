package fsutil

import (
	"fmt"
	"os"
)

// SyncDir flushes a folder's entries (a rename into it, say) to stable
// storage, so that after a power cut the folder shows the renamed file.
func SyncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("syncing folder %s: %w", dir, err)
	}
	err = d.Sync()
	if cerr := d.Close(); err == nil {
		err = cerr
	}
	if err != nil {
		return fmt.Errorf("syncing folder %s: %w", dir, err)
	}
	return nil
}

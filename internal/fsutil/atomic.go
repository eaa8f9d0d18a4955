// Package fsutil holds file helpers shared by pipit's packages.
package fsutil

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// WriteFile writes data to path atomically; see [WriteWith].
func WriteFile(path string, data []byte) error {
	return WriteWith(path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

// WriteWith calls write with a buffered writer on a temporary file beside
// path, syncs the file and renames it over path, so readers see either the
// old or the new contents, never a mix, and a failed write (or a crash)
// leaves any existing file untouched. The temporary file is removed on
// error.
func WriteWith(path string, write func(w io.Writer) error) error {
	dir := filepath.Dir(path)
	f, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	tmp := f.Name()
	bw := bufio.NewWriterSize(f, 1<<16)
	err = write(bw)
	if err == nil {
		err = bw.Flush()
	}
	if err == nil {
		err = f.Chmod(0o644) // CreateTemp makes 0600; outputs are ordinary files
	}
	if err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(tmp, path)
	}
	if err != nil {
		os.Remove(tmp)
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return nil
}

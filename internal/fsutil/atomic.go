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

// Outputs writes a set of files that appear together or not at all, for
// a command with several outputs: each file is written to a temporary
// file beside its target, [Outputs.Commit] syncs them all and only then
// renames them into place, and [Outputs.Abort] (or a failed Commit)
// removes every temporary file and leaves the targets as they were. The
// renames come one after another once every file is complete, so a crash
// between two of them can leave new files beside old ones, never a
// partial file. The zero value is ready to use.
type Outputs struct {
	files []*output
}

type output struct {
	path, tmp string
	f         *os.File
	w         *bufio.Writer
}

// Create starts the file at path and returns a buffered writer to it.
// On error the outputs created so far are aborted.
func (o *Outputs) Create(path string) (io.Writer, error) {
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		o.Abort()
		return nil, fmt.Errorf("writing %s: %w", path, err)
	}
	out := &output{path: path, tmp: f.Name(), f: f, w: bufio.NewWriterSize(f, 1<<16)}
	o.files = append(o.files, out)
	return out.w, nil
}

// Commit completes every file (flush, mode 0644, sync, close) and then
// renames each over its target, after checking that no target is a
// directory. On error every temporary file left is removed and the error
// names the file.
func (o *Outputs) Commit() error {
	for _, out := range o.files {
		err := out.w.Flush()
		if err == nil {
			err = out.f.Chmod(0o644) // CreateTemp makes 0600; outputs are ordinary files
		}
		if err == nil {
			err = out.f.Sync()
		}
		if cerr := out.f.Close(); err == nil {
			err = cerr
		}
		out.f = nil
		if err != nil {
			o.Abort()
			return fmt.Errorf("writing %s: %w", out.path, err)
		}
	}
	// A directory in a target's place would fail its rename after the
	// others had been done: refuse before renaming any.
	for _, out := range o.files {
		if fi, err := os.Stat(out.path); err == nil && fi.IsDir() {
			o.Abort()
			return fmt.Errorf("writing %s: is a directory", out.path)
		}
	}
	for i, out := range o.files {
		if err := os.Rename(out.tmp, out.path); err != nil {
			o.files = o.files[i:]
			o.Abort()
			return fmt.Errorf("writing %s: %w", out.path, err)
		}
	}
	o.files = nil
	return nil
}

// Abort removes every temporary file; the targets are left untouched.
// It may be called after Commit (it then does nothing).
func (o *Outputs) Abort() {
	for _, out := range o.files {
		if out.f != nil {
			out.f.Close()
		}
		os.Remove(out.tmp)
	}
	o.files = nil
}

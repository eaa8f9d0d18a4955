package fsutil

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// ReplaceOptions says how [ReplaceDir] writes a directory and which
// directories it may replace.
type ReplaceOptions struct {
	// Write fills tmp, a new empty directory, and checks what it wrote.
	Write func(tmp string) error
	// Replaceable returns nil if an existing directory may be replaced
	// (it holds nothing but what Write makes), or an error naming the
	// problem.
	Replaceable func(dir string) error
	// Complete returns nil if dir is a complete set; only a complete set
	// a killed run moved away is put back (see [RecoverDir]).
	Complete func(dir string) error
}

// Steps of ReplaceDir, for the tests' simulated crashes.
const (
	stepTempMade    = "temporary directory made"
	stepHalfWritten = "half written" // the test's Write is cut short
	stepWritten     = "written"
	stepSwapped     = "exchanged"
	stepMovedAway   = "old moved away"
	stepMovedIn     = "new moved in"
)

var (
	// crashAt names the step after which ReplaceDir stops as a killed
	// process would, without any cleanup (tests only).
	crashAt    string
	errCrashed = errors.New("fsutil: simulated crash")
	// noExchange makes ReplaceDir use two renames where it could exchange
	// (tests only).
	noExchange bool
	// errNoExchange: this system or file system cannot exchange two
	// directories in one step.
	errNoExchange = errors.New("fsutil: no exchange")
)

func crashed(step string) bool { return crashAt == step }

// Sibling names: .BASE.tmp-N holds a set being written (or, after an
// exchange, the old set being removed); .BASE.old-N holds the old set
// between the two renames. N is decimal digits (os.MkdirTemp's).
func tmpPrefix(base string) string { return "." + base + ".tmp-" }
func oldPrefix(base string) string { return "." + base + ".old-" }

func isSibling(name, prefix string) bool {
	rest, ok := strings.CutPrefix(name, prefix)
	if !ok || rest == "" {
		return false
	}
	for _, c := range rest {
		if c < '0' || c > '9' {
			return false
		}
	}
	return true
}

// ReplaceDir writes the directory dir as a whole: Write fills a new
// sibling directory .BASE.tmp-N (BASE = dir's name), which is then put in
// dir's place by rename, so a reader never finds a mix of old and new
// files, and a process killed at any moment leaves dir as it was or
// complete with the new contents. Where dir exists, it must be a
// directory that Replaceable accepts; the new one gets its permissions.
// On Linux the two directories are exchanged in one step (renameat2
// RENAME_EXCHANGE) and the old one is removed; elsewhere, or where the
// file system cannot exchange, the old directory is first renamed to
// .BASE.old-N, leaving a moment without dir, which [RecoverDir] repairs.
// Before writing, ReplaceDir calls RecoverDir, and it holds a lock on
// dir's parent throughout (flock, where the system has it) so two runs
// never clean up after each other. It returns RecoverDir's notes.
func ReplaceDir(dir string, o ReplaceOptions) (notes []string, err error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return nil, err
	}
	parent, base := filepath.Split(abs)
	if err := os.MkdirAll(parent, 0o755); err != nil {
		return nil, err
	}
	unlock, err := lockDir(parent)
	if err != nil {
		return nil, err
	}
	defer unlock()
	if notes, err = recoverLocked(dir, parent, base, o.Complete); err != nil {
		return notes, err
	}
	mode := os.FileMode(0o755)
	fi, err := os.Lstat(abs)
	exists := err == nil
	switch {
	case err != nil && !os.IsNotExist(err):
		return notes, err
	case exists && fi.Mode()&os.ModeSymlink != 0:
		return notes, fmt.Errorf("%s is a symbolic link; give the directory itself", dir)
	case exists && !fi.IsDir():
		return notes, fmt.Errorf("%s exists and is not a directory", dir)
	case exists:
		if err := o.Replaceable(abs); err != nil {
			return notes, err
		}
		mode = fi.Mode().Perm()
	}
	tmp, err := os.MkdirTemp(parent, tmpPrefix(base)+"*")
	if err != nil {
		return notes, err
	}
	if crashed(stepTempMade) {
		return notes, errCrashed
	}
	if err := os.Chmod(tmp, mode); err != nil { // MkdirTemp makes 0700
		os.RemoveAll(tmp)
		return notes, err
	}
	if crashed(stepHalfWritten) {
		WriteFile(filepath.Join(tmp, "a"), []byte("half"))
		return notes, errCrashed
	}
	if err := o.Write(tmp); err != nil {
		os.RemoveAll(tmp)
		return notes, err
	}
	if err := SyncDir(tmp); err != nil {
		os.RemoveAll(tmp)
		return notes, err
	}
	if crashed(stepWritten) {
		return notes, errCrashed
	}
	if !exists {
		if err := os.Rename(tmp, abs); err != nil {
			os.RemoveAll(tmp)
			return notes, err
		}
		return notes, SyncDir(parent)
	}
	if !noExchange {
		switch err := exchangeDirs(tmp, abs); {
		case err == nil:
			if crashed(stepSwapped) {
				return notes, errCrashed
			}
			if err := SyncDir(parent); err != nil {
				return notes, err
			}
			return notes, os.RemoveAll(tmp) // the old set now
		case !errors.Is(err, errNoExchange):
			os.RemoveAll(tmp)
			return notes, err
		}
	}
	old, err := os.MkdirTemp(parent, oldPrefix(base)+"*") // reserves a name
	if err == nil {
		err = os.Remove(old)
	}
	if err == nil {
		err = os.Rename(abs, old)
	}
	if err != nil {
		os.RemoveAll(tmp)
		return notes, err
	}
	if crashed(stepMovedAway) {
		return notes, errCrashed
	}
	if err := os.Rename(tmp, abs); err != nil {
		if rerr := os.Rename(old, abs); rerr != nil {
			return notes, fmt.Errorf("%w; the previous contents of %s are in %s", err, dir, old)
		}
		os.RemoveAll(tmp)
		return notes, err
	}
	if err := SyncDir(parent); err != nil {
		return notes, err
	}
	if crashed(stepMovedIn) {
		return notes, errCrashed
	}
	return notes, os.RemoveAll(old)
}

// RecoverDir repairs what a killed [ReplaceDir] of dir left beside it:
// it removes every .BASE.tmp-N (a set being written, or an old set being
// removed), and every .BASE.old-N when dir exists. When dir is missing
// (the run was killed between its two renames), the newest .BASE.old-N
// that complete accepts is renamed back to dir and the others removed.
// It returns one note per directory it put back or removed.
func RecoverDir(dir string, complete func(dir string) error) ([]string, error) {
	abs, err := filepath.Abs(dir)
	if err != nil {
		return nil, err
	}
	parent, base := filepath.Split(abs)
	if _, err := os.Stat(parent); os.IsNotExist(err) {
		return nil, nil
	}
	unlock, err := lockDir(parent)
	if err != nil {
		return nil, err
	}
	defer unlock()
	return recoverLocked(dir, parent, base, complete)
}

func recoverLocked(dir, parent, base string, complete func(string) error) ([]string, error) {
	ents, err := os.ReadDir(parent)
	if err != nil {
		return nil, err
	}
	var notes, olds []string
	for _, e := range ents {
		p := filepath.Join(parent, e.Name())
		switch {
		case isSibling(e.Name(), tmpPrefix(base)):
			if err := os.RemoveAll(p); err != nil {
				return notes, err
			}
			notes = append(notes, fmt.Sprintf("removed %s, left by an interrupted run", p))
		case isSibling(e.Name(), oldPrefix(base)):
			olds = append(olds, p)
		}
	}
	if len(olds) == 0 {
		return notes, nil
	}
	abs := filepath.Join(parent, base)
	_, err = os.Lstat(abs)
	missing := os.IsNotExist(err)
	if err != nil && !missing {
		return notes, err
	}
	why := map[string]string{}
	for _, p := range olds {
		why[p] = "left by an interrupted run"
	}
	if missing {
		mtime := map[string]int64{}
		for _, p := range olds {
			if fi, err := os.Stat(p); err == nil {
				mtime[p] = fi.ModTime().UnixNano()
			}
		}
		sort.SliceStable(olds, func(i, j int) bool { return mtime[olds[i]] > mtime[olds[j]] })
		for i, p := range olds {
			if err := complete(p); err != nil {
				why[p] = fmt.Sprintf("an incomplete earlier set (%v)", err)
				continue
			}
			if err := os.Rename(p, abs); err != nil {
				return notes, err
			}
			notes = append(notes, fmt.Sprintf("put back %s from %s: a killed run had moved it away", dir, p))
			for _, q := range olds[i+1:] {
				why[q] = "older than the one put back"
			}
			olds = append(olds[:i:i], olds[i+1:]...)
			if err := SyncDir(parent); err != nil {
				return notes, err
			}
			break
		}
	}
	for _, p := range olds {
		if err := os.RemoveAll(p); err != nil {
			return notes, err
		}
		notes = append(notes, fmt.Sprintf("removed %s, %s", p, why[p]))
	}
	return notes, nil
}

// SyncDir flushes a directory's entries (a rename into it, say) to stable
// storage, so that after a power cut it shows the renamed file; where a
// directory cannot be synced (Windows) the error is ignored.
func SyncDir(dir string) error {
	f, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer f.Close()
	if err := f.Sync(); err != nil && !ignoreDirSyncError(err) {
		return fmt.Errorf("syncing %s: %w", dir, err)
	}
	return nil
}

//go:build !(linux || darwin || freebsd || netbsd || openbsd || dragonfly)

package fsutil

// lockDir does nothing here: this system has no flock. Two runs writing
// the same directory at once may then remove each other's temporaries.
func lockDir(string) (unlock func(), err error) { return func() {}, nil }

// Directories cannot be synced on every such system (Windows).
func ignoreDirSyncError(error) bool { return true }

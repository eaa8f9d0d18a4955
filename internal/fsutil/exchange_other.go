//go:build !linux

package fsutil

// exchangeDirs is not available here; ReplaceDir renames twice.
func exchangeDirs(string, string) error { return errNoExchange }

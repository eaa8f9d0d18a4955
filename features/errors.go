package features

import (
	"errors"
	"fmt"
)

// ErrBadConfig is wrapped by every error that reports an invalid [Config]
// or an invalid argument to a constructor in this package.
var ErrBadConfig = errors.New("features: bad config")

// ErrUnsupportedFormat is wrapped by [*WAVError] when a file is a valid
// RIFF/WAVE container whose sample encoding pipit does not decode (for
// example A-law or 64-bit float).
var ErrUnsupportedFormat = errors.New("unsupported sample format")

// WAVError reports a WAV file that could not be decoded. Name is the file
// name given to the reader (or "<input>" when none was given), Offset the
// byte offset where the problem was found (-1 when it is not tied to one
// place) and Reason a lower-case description.
type WAVError struct {
	Name   string
	Offset int64
	Reason string
	Err    error // optional wrapped cause, for errors.Is
}

// Error implements error.
func (e *WAVError) Error() string {
	if e.Offset >= 0 {
		return fmt.Sprintf("features: %s: %s (at byte %d)", e.Name, e.Reason, e.Offset)
	}
	return fmt.Sprintf("features: %s: %s", e.Name, e.Reason)
}

// Unwrap returns the wrapped cause, if any.
func (e *WAVError) Unwrap() error { return e.Err }

func badConfig(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrBadConfig}, args...)...)
}

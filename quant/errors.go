package quant

import (
	"errors"
	"fmt"
)

// Sentinel errors callers branch on with errors.Is.
var (
	// ErrFormat is wrapped by every error about a malformed quantised
	// model file, blob or scheme description (see [FormatError]).
	ErrFormat = errors.New("quant: malformed model file")
	// ErrUnsupportedVersion is wrapped by errors about a file of a format
	// version this pipit does not read.
	ErrUnsupportedVersion = errors.New("quant: unsupported format version")
	// ErrOverflow is wrapped by errors about a layer whose worst-case
	// accumulator does not fit int32 ([Model.CheckOverflow]).
	ErrOverflow = errors.New("quant: accumulator overflow")
)

// FormatError reports a malformed quantised model file, blob or scheme
// description. Offset is the byte offset where the problem was found: of
// the field itself in binary data, of the start of the JSON document or
// section holding it otherwise.
type FormatError struct {
	Name   string // file name, or "blob" / "scheme"
	Offset int64
	Reason string
	Err    error // the sentinel it is an instance of besides ErrFormat (ErrUnsupportedVersion), or nil
}

// Error implements error.
func (e *FormatError) Error() string {
	return fmt.Sprintf("quant: %s: %s (at byte %d)", e.Name, e.Reason, e.Offset)
}

// Unwrap makes errors.Is(err, ErrFormat) true, and errors.Is(err, e.Err).
func (e *FormatError) Unwrap() []error {
	if e.Err != nil {
		return []error{ErrFormat, e.Err}
	}
	return []error{ErrFormat}
}

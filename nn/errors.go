package nn

import (
	"errors"
	"fmt"
)

// Sentinel errors callers branch on.
var (
	// ErrShape is wrapped by errors about shapes that cannot be planned.
	ErrShape = errors.New("nn: bad shape")
	// ErrSpec is wrapped by every layer-spec parse error.
	ErrSpec = errors.New("nn: bad layer spec")
	// ErrNonFinite reports a NaN or infinite loss or gradient.
	ErrNonFinite = errors.New("nn: non-finite value")
	// ErrUnsupportedVersion reports a checkpoint of an unknown version.
	ErrUnsupportedVersion = errors.New("nn: unsupported checkpoint version")
	// ErrCheckpointMismatch reports a checkpoint that does not fit the
	// network or trainer it is loaded into.
	ErrCheckpointMismatch = errors.New("nn: checkpoint does not match")
)

// SpecError reports a layer-spec problem at a line (1-based).
type SpecError struct {
	Line   int
	Text   string
	Reason string
}

// Error implements error.
func (e *SpecError) Error() string {
	return fmt.Sprintf("nn: layer spec line %d %q: %s", e.Line, e.Text, e.Reason)
}

// Unwrap makes errors.Is(err, ErrSpec) true.
func (e *SpecError) Unwrap() error { return ErrSpec }

// FormatError reports a malformed checkpoint; Offset is the byte offset.
type FormatError struct {
	Name   string
	Offset int64
	Reason string
}

// Error implements error.
func (e *FormatError) Error() string {
	return fmt.Sprintf("nn: checkpoint %s: %s (at byte %d)", e.Name, e.Reason, e.Offset)
}

func shapeErr(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrShape}, args...)...)
}

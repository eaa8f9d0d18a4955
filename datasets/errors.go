package datasets

import (
	"errors"
	"fmt"
)

// ErrCorpus is wrapped by errors about a corpus that cannot be used as
// given (missing files, unknown folds, empty classes).
var ErrCorpus = errors.New("datasets: bad corpus")

// ManifestError reports a problem at a line (1-based) of a manifest file.
type ManifestError struct {
	Name   string
	Line   int
	Reason string
}

// Error implements error.
func (e *ManifestError) Error() string {
	return fmt.Sprintf("datasets: %s line %d: %s", e.Name, e.Line, e.Reason)
}

// Unwrap makes errors.Is(err, ErrCorpus) true.
func (e *ManifestError) Unwrap() error { return ErrCorpus }

func corpusErr(format string, args ...any) error {
	return fmt.Errorf("%w: "+format, append([]any{ErrCorpus}, args...)...)
}

// ErrTooFewFolds is wrapped, with [ErrCorpus], by the errors of
// [Corpus.CheckFoldCount] and [Corpus.CheckTrainingClasses] when a corpus
// has fewer folds than a use of it needs.
var ErrTooFewFolds = errors.New("datasets: too few folds")

// foldsError is an error wrapping both ErrCorpus and ErrTooFewFolds.
type foldsError struct{ msg string }

func (e *foldsError) Error() string   { return e.msg }
func (e *foldsError) Unwrap() []error { return []error{ErrCorpus, ErrTooFewFolds} }

package datasets

import (
	"fmt"
	"hash/fnv"
	"sort"
	"strconv"
	"strings"
)

// AssignFolds puts every clip into one of k folds, deterministically from
// seed, so that all clips of a group (one source recording) share a fold
// and each class is spread evenly: groups are ordered by a seeded hash of
// their name, then dealt class by class (by the label of each group's first
// clip) to the fold that so far holds the fewest clips of that class,
// lowest fold first on ties. It replaces any folds the corpus had.
func (c *Corpus) AssignFolds(k int, seed uint64) error {
	if k < 2 {
		return corpusErr("need at least 2 folds, got %d", k)
	}
	type group struct {
		name  string
		key   uint64
		label int
		clips []int
	}
	byName := map[string]*group{}
	var groups []*group
	for i, cl := range c.Clips {
		g, ok := byName[cl.Group]
		if !ok {
			h := fnv.New64a()
			var s [8]byte
			for j := range s {
				s[j] = byte(seed >> (8 * j))
			}
			h.Write(s[:])
			h.Write([]byte(cl.Group))
			g = &group{name: cl.Group, key: h.Sum64(), label: cl.Label}
			byName[cl.Group] = g
			groups = append(groups, g)
		}
		g.clips = append(g.clips, i)
	}
	if len(groups) < k {
		return corpusErr("%d source groups cannot fill %d folds", len(groups), k)
	}
	sort.Slice(groups, func(a, b int) bool {
		if groups[a].key != groups[b].key {
			return groups[a].key < groups[b].key
		}
		return groups[a].name < groups[b].name
	})
	perClass := make([][]int, len(c.Classes)) // [class][fold] clip counts
	for i := range perClass {
		perClass[i] = make([]int, k)
	}
	total := make([]int, k)
	for _, g := range groups {
		counts := perClass[g.label]
		best := 0
		for f := 1; f < k; f++ {
			if counts[f] < counts[best] || (counts[f] == counts[best] && total[f] < total[best]) {
				best = f
			}
		}
		counts[best] += len(g.clips)
		total[best] += len(g.clips)
		for _, i := range g.clips {
			c.Clips[i].Fold = best
		}
	}
	c.HasFolds, c.Folds = true, k
	c.FoldLabels = make([]string, k)
	for f := range c.FoldLabels {
		c.FoldLabels[f] = strconv.Itoa(f)
	}
	return c.checkFolds()
}

// FoldLabel returns the label of fold index k (see [Corpus.FoldLabels]),
// or k as a number for a corpus without labels.
func (c *Corpus) FoldLabel(k int) string {
	if k >= 0 && k < len(c.FoldLabels) {
		return c.FoldLabels[k]
	}
	return strconv.Itoa(k)
}

// FoldIndex returns the index of the fold labelled label. An unknown
// label is an error wrapping [ErrCorpus] that lists the corpus's labels.
func (c *Corpus) FoldIndex(label string) (int, error) {
	if !c.HasFolds {
		return 0, corpusErr("%s has no folds", c.Source)
	}
	for k, l := range c.FoldLabels {
		if l == label {
			return k, nil
		}
	}
	return 0, corpusErr("%s has no fold %q (its folds: %s)", c.Source, label, strings.Join(c.FoldLabels, ", "))
}

// Split returns the IDs of clips in fold index fold and of all others.
func (c *Corpus) Split(fold int) (in, out []int) {
	for _, cl := range c.Clips {
		if cl.Fold == fold {
			in = append(in, cl.ID)
		} else {
			out = append(out, cl.ID)
		}
	}
	return in, out
}

// Partition returns the IDs of clips in fold index test, in fold index
// val and in every other fold (the training folds), each in corpus order.
func (c *Corpus) Partition(test, val int) (train, valIDs, testIDs []int) {
	for _, cl := range c.Clips {
		switch cl.Fold {
		case test:
			testIDs = append(testIDs, cl.ID)
		case val:
			valIDs = append(valIDs, cl.ID)
		default:
			train = append(train, cl.ID)
		}
	}
	return train, valIDs, testIDs
}

// Fold counts that uses of a corpus need (see [Corpus.CheckFoldCount]).
const (
	// MinFoldsValidation is the folds cross-validation or a validation
	// fold apart from the test fold needs.
	MinFoldsValidation = 2
	// MinFoldsTraining is the folds training with a test fold, a
	// validation fold and at least one training fold needs.
	MinFoldsTraining = 3
)

// CheckFoldCount returns nil when c has at least need folds, else an
// error wrapping [ErrTooFewFolds] and [ErrCorpus] that names the corpus,
// its folds (with their labels) and what they are too few for, e.g.
//
//	datasets: yard.csv has one fold (label "3"): cross-validation and a
//	validation fold need at least 2 folds (3 for test + validation + training)
//
// Callers check it before choosing folds, so a corpus whose rows are all
// in one fold is reported as that rather than as a bad fold choice.
func (c *Corpus) CheckFoldCount(need int) error {
	if c.HasFolds && c.Folds >= need {
		return nil
	}
	msg := fmt.Sprintf("datasets: %s has %s: ", c.Source, c.foldsDesc())
	switch {
	case c.Folds < MinFoldsValidation:
		msg += fmt.Sprintf("cross-validation and a validation fold need at least %d folds (%d for test + validation + training)", MinFoldsValidation, MinFoldsTraining)
	case need == MinFoldsTraining:
		msg += fmt.Sprintf("a test fold, a validation fold and training folds need at least %d", MinFoldsTraining)
	default:
		msg += fmt.Sprintf("at least %d are needed", need)
	}
	return &foldsError{msg}
}

// foldsDesc describes c's folds: "no folds", "one fold (label "x")" or
// "3 folds (labels 1, 2, 3)".
func (c *Corpus) foldsDesc() string {
	switch {
	case !c.HasFolds || c.Folds == 0:
		return "no folds"
	case c.Folds == 1:
		return fmt.Sprintf("one fold (label %q)", c.FoldLabel(0))
	}
	labels := make([]string, c.Folds)
	for k := range labels {
		labels[k] = c.FoldLabel(k)
	}
	return fmt.Sprintf("%d folds (labels %s)", c.Folds, strings.Join(labels, ", "))
}

// CheckTrainingClasses returns nil when, with fold index test held out
// for testing and val for validation (see [Corpus.Partition]), the
// training folds left hold at least one clip of every class. Otherwise it
// returns an error wrapping [ErrCorpus] that names the corpus, the test
// and validation folds and each class without a training clip, with the
// manifest lines of its clips (file paths for a folder corpus). When the
// two folds leave no training fold at all the error also wraps
// [ErrTooFewFolds]; out-of-range indices are an error too.
func (c *Corpus) CheckTrainingClasses(test, val int) error {
	if !c.HasFolds {
		return corpusErr("%s has no folds", c.Source)
	}
	if test < 0 || test >= c.Folds || val < 0 || val >= c.Folds {
		return corpusErr("%s: test fold index %d or validation fold index %d outside 0..%d", c.Source, test, val, c.Folds-1)
	}
	held := fmt.Sprintf("test fold %q and validation fold %q leave", c.FoldLabel(test), c.FoldLabel(val))
	if test == val {
		held = fmt.Sprintf("test and validation fold %q leaves", c.FoldLabel(test))
	}
	var training []string
	for k := 0; k < c.Folds; k++ {
		if k != test && k != val {
			training = append(training, c.FoldLabel(k))
		}
	}
	if len(training) == 0 {
		return &foldsError{fmt.Sprintf("datasets: %s has %s: %s no training fold; training needs at least %d folds", c.Source, c.foldsDesc(), held, MinFoldsTraining)}
	}
	inTraining := make([]bool, len(c.Classes))
	where := make([][]string, len(c.Classes))
	for _, cl := range c.Clips {
		if cl.Label < 0 || cl.Label >= len(c.Classes) {
			continue
		}
		if cl.Fold != test && cl.Fold != val {
			inTraining[cl.Label] = true
		} else if cl.Line > 0 {
			where[cl.Label] = append(where[cl.Label], strconv.Itoa(cl.Line))
		} else {
			where[cl.Label] = append(where[cl.Label], cl.Path)
		}
	}
	var missing []string
	for k, name := range c.Classes {
		if inTraining[k] {
			continue
		}
		w := where[k]
		switch {
		case len(w) == 0:
			missing = append(missing, fmt.Sprintf("class %q (no clips in the corpus)", name))
			continue
		case len(w) > 5:
			w = append(w[:5:5], fmt.Sprintf("%d more", len(w)-5))
		}
		what := "files"
		if c.Clips[0].Line > 0 {
			what = "lines"
			if len(where[k]) == 1 {
				what = "line"
			}
		}
		missing = append(missing, fmt.Sprintf("class %q (%s %s)", name, what, strings.Join(w, ", ")))
	}
	if len(missing) == 0 {
		return nil
	}
	folds := "folds (%s) need"
	if len(training) == 1 {
		folds = "fold (%s) needs"
	}
	folds = fmt.Sprintf(folds, strings.Join(training, ", "))
	return corpusErr("%s: %s no training clip of %s: the training %s at least one clip of every class; choose other folds or move clips into the training folds",
		c.Source, held, strings.Join(missing, " nor of "), folds)
}

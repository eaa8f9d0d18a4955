package datasets

import (
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

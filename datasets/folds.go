package datasets

import (
	"hash/fnv"
	"sort"
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
	return c.checkFolds()
}

// Split returns the IDs of clips in the given fold and of all others.
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

package datasets

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strconv"
)

// ClipSet identifies a set of clips without listing them: how many there
// are and a SHA-256 over their sorted descriptions (path relative to the
// corpus root with forward slashes, span start and end in seconds, class
// name; one tab-separated line each). Moving a corpus to another folder
// keeps its sets; relabelling a clip, cutting another span or moving a
// clip to another fold changes them.
type ClipSet struct {
	Clips  int    `json:"clips"`
	SHA256 string `json:"sha256"`
}

// Identify returns the [ClipSet] of the clips ids of c.
func (c *Corpus) Identify(ids []int) *ClipSet {
	root := c.Source
	if fi, err := os.Stat(root); err == nil && !fi.IsDir() {
		root = filepath.Dir(root)
	}
	lines := make([]string, 0, len(ids))
	for _, id := range ids {
		cl := c.Clips[id]
		p := cl.Path
		if r, err := filepath.Rel(root, p); err == nil {
			p = r
		}
		lines = append(lines, filepath.ToSlash(p)+"\t"+strconv.FormatFloat(cl.Start, 'g', -1, 64)+"\t"+
			strconv.FormatFloat(cl.End, 'g', -1, 64)+"\t"+c.Classes[cl.Label])
	}
	sort.Strings(lines)
	h := sha256.New()
	for _, l := range lines {
		h.Write([]byte(l))
		h.Write([]byte{'\n'})
	}
	return &ClipSet{Clips: len(ids), SHA256: hex.EncodeToString(h.Sum(nil))}
}

// ErrNotTestFold is wrapped by [ModelInfo.CheckTestFold] when a corpus's
// fold of the model's test-fold label holds other clips than the model
// was tested on.
var ErrNotTestFold = fmt.Errorf("not the model's test fold")

// CheckTestFold compares the clips of fold testIdx of c with the test
// clips m recorded at training. It returns an error wrapping
// [ErrNotTestFold] when they differ (scoring them as the test fold could
// score clips the model was trained on), and (false, nil) when m records
// no test clips (a model written before they were recorded), so that the
// caller can warn.
func (m *ModelInfo) CheckTestFold(c *Corpus, testIdx int) (checked bool, err error) {
	if m.TestClips == nil {
		return false, nil
	}
	ids, _ := c.Split(testIdx)
	got := c.Identify(ids)
	if *got == *m.TestClips {
		return true, nil
	}
	what := "other clips"
	if got.Clips != m.TestClips.Clips {
		what = fmt.Sprintf("%d clips where the model's test fold had %d", got.Clips, m.TestClips.Clips)
	}
	return true, fmt.Errorf("datasets: %s: fold %s holds %s: %w (other folds, paths, spans or labels than at training), so scoring it as the test fold could score clips the model was trained on; use the manifest the model was trained with (a corpus the model never saw can be scored whole)",
		c.Source, m.TestFold, what, ErrNotTestFold)
}

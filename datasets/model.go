package datasets

import (
	"encoding/json"
	"fmt"

	"github.com/pipit-audio/pipit/features"
)

// ModelInfoVersion is the version of [ModelInfo]'s JSON form. Version 3
// records the test and validation folds by their labels (strings);
// version 2 named the front end's per-frame floor "floor_below_peak_db"
// and its end padding "pad_ends". Older versions are refused.
const ModelInfoVersion = 3

// ModelInfo is what a trained model file records besides the network, so
// that evaluation, quantisation and a device reproduce the inputs exactly.
// It is stored as the meta JSON of an nn checkpoint.
type ModelInfo struct {
	Version  int                 `json:"version"`
	Arch     string              `json:"arch"`
	Classes  []string            `json:"classes"`
	FrontEnd features.Config     `json:"front_end"`
	Window   WindowConfig        `json:"window"`
	Stats    *features.BandStats `json:"band_stats"`
	TestFold string              `json:"test_fold"` // fold label (see Corpus.FoldLabels)
	ValFold  string              `json:"val_fold"`  // fold label
	Folds    int                 `json:"folds"`
	FoldSeed uint64              `json:"fold_seed"` // seed used when folds were assigned (corpora without folds)
	// TestClips and ValClips identify the clips of the test and validation
	// folds at training time (see [Corpus.Identify]); CalibClips those an
	// int8 model was calibrated on. Models written before these were
	// recorded have none, and [ModelInfo.CheckTestFold] cannot check them.
	TestClips  *ClipSet `json:"test_clips,omitempty"`
	ValClips   *ClipSet `json:"val_clips,omitempty"`
	CalibClips *ClipSet `json:"calib_clips,omitempty"`
}

// Marshal returns m as JSON.
func (m *ModelInfo) Marshal() (json.RawMessage, error) {
	b, err := json.Marshal(m)
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	return b, nil
}

// ParseModelInfo decodes and validates the meta JSON of a model file.
func ParseModelInfo(name string, raw json.RawMessage) (*ModelInfo, error) {
	var m ModelInfo
	if err := json.Unmarshal(raw, &m); err != nil {
		return nil, fmt.Errorf("datasets: %s: model info: %w", name, err)
	}
	if m.Version != ModelInfoVersion {
		return nil, fmt.Errorf("datasets: %s: model info version %d, want %d", name, m.Version, ModelInfoVersion)
	}
	if err := m.FrontEnd.Validate(); err != nil {
		return nil, fmt.Errorf("datasets: %s: %w", name, err)
	}
	if err := m.Window.Check(); err != nil {
		return nil, fmt.Errorf("datasets: %s: %w", name, err)
	}
	if len(m.Classes) < 2 || m.Stats == nil || len(m.Stats.Mean) != m.FrontEnd.Bands || len(m.Stats.Std) != m.FrontEnd.Bands {
		return nil, fmt.Errorf("datasets: %s: model info lacks classes or band statistics for %d bands", name, m.FrontEnd.Bands)
	}
	return &m, nil
}

// MatchClasses maps corpus class names onto the model's class indices; a
// corpus class the model does not know is an error.
func (m *ModelInfo) MatchClasses(c *Corpus) ([]int, error) {
	idx := map[string]int{}
	for i, n := range m.Classes {
		idx[n] = i
	}
	out := make([]int, len(c.Classes))
	for i, n := range c.Classes {
		k, ok := idx[n]
		if !ok {
			return nil, corpusErr("corpus class %q is not one of the model's classes %v", n, m.Classes)
		}
		out[i] = k
	}
	return out, nil
}

// Relabel rewrites clip labels and class names of c to the model's order.
func (m *ModelInfo) Relabel(c *Corpus) error {
	mp, err := m.MatchClasses(c)
	if err != nil {
		return err
	}
	for i := range c.Clips {
		c.Clips[i].Label = mp[c.Clips[i].Label]
	}
	c.Classes = append([]string(nil), m.Classes...)
	return nil
}

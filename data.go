package pipit

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

// Data says where clips come from and how to read them.
type Data struct {
	Path     string // manifest CSV or folder with one sub-folder per class
	Group    string // manifest column naming the source recording ("": "group" if present)
	CacheDir string // feature cache directory ("": no cache)
	SkipBad  bool   // skip unreadable WAV files (reported through Reporter.Warn) instead of failing
}

// DefaultFolds is the number of folds [OpenCorpus] assigns to a corpus
// without folds when asked for 0.
const DefaultFolds = 5

// OpenCorpus reads the corpus at d.Path and, when it has no folds of its
// own, assigns folds group-safely from seed (datasets.Corpus.AssignFolds;
// folds 0 means [DefaultFolds]).
func OpenCorpus(d Data, folds int, seed uint64) (*datasets.Corpus, error) {
	c, err := datasets.Open(d.Path, d.Group)
	if err != nil {
		return nil, err
	}
	if !c.HasFolds {
		if folds == 0 {
			folds = DefaultFolds
		}
		if err := c.AssignFolds(folds, seed); err != nil {
			return nil, fmt.Errorf("%s: %w", d.Path, err)
		}
	}
	return c, nil
}

// openForModel reads the corpus at d.Path for a trained model: classes in
// the model's order, and the model's folds when the corpus has none.
func openForModel(d Data, info *datasets.ModelInfo) (*datasets.Corpus, error) {
	c, err := datasets.Open(d.Path, d.Group)
	if err != nil {
		return nil, err
	}
	if err := info.Relabel(c); err != nil {
		return nil, fmt.Errorf("%s: %w", d.Path, err)
	}
	if !c.HasFolds {
		if err := c.AssignFolds(info.Folds, info.FoldSeed); err != nil {
			return nil, fmt.Errorf("%s: %w", d.Path, err)
		}
	}
	return c, nil
}

// loader loads sets of one corpus with one front end and window.
type loader struct {
	c       *datasets.Corpus
	data    Data
	fe      features.Config
	win     datasets.WindowConfig
	cache   *datasets.Cache
	rep     Reporter
	skipped int
}

func newLoader(c *datasets.Corpus, d Data, fe features.Config, win datasets.WindowConfig, rep Reporter) *loader {
	return &loader{c: c, data: d, fe: fe, win: win, cache: &datasets.Cache{Dir: d.CacheDir}, rep: orQuiet(rep)}
}

// load reads the clips ids as the set called name, normalised by stats
// (nil: none yet).
func (l *loader) load(name string, ids []int, keepAudio bool, stats *features.BandStats) (*datasets.Set, error) {
	l.rep.Stage("load " + name)
	s, err := datasets.Load(l.c, ids, datasets.Options{FrontEnd: l.fe, Window: l.win, Cache: l.cache, SkipBad: l.data.SkipBad, KeepAudio: keepAudio,
		Warn:     func(err error) { l.skipped++; l.rep.Warn(fmt.Errorf("skipping: %w", err)) },
		Progress: func(d, t int) { l.rep.Step(d, t, "clips", "") }})
	if err != nil {
		return nil, err
	}
	s.Stats = stats
	l.rep.Done(fmt.Sprintf("%d clips → %d windows", len(s.Clips), s.Len()))
	return s, nil
}

// NewNetwork builds the built-in architecture arch (nn.ArchNames) for
// classes outputs, or the network of the layer-spec file at path arch,
// initialised from seed.
func NewNetwork(arch string, classes int, seed uint64) (*nn.Network, error) {
	for _, name := range nn.ArchNames() {
		if arch == name {
			return nn.Arch(arch, classes, seed)
		}
	}
	text, err := os.ReadFile(arch)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("pipit: architecture %q is neither built in (%s) nor a spec file", arch, strings.Join(nn.ArchNames(), ", "))
		}
		return nil, fmt.Errorf("pipit: %w", err)
	}
	net, err := nn.FromSpec(string(text), nn.Shape{}, seed)
	if err != nil {
		return nil, fmt.Errorf("pipit: %s: %w", filepath.Clean(arch), err)
	}
	return net, nil
}

package sweep

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"sort"
	"strconv"
	"strings"

	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// GridFormat is the first word of a grid file's first non-comment line.
const GridFormat = "pipit-grid"

// Grid is a parsed grid file: the values of each axis, and the training
// settings shared by every job. The zero value of an axis means its default
// (one value).
type Grid struct {
	RateHz   []int     // "rate", Hz; default 16000
	Window   []int     // "window", samples; default 512
	Hop      []int     // "hop", samples; default 256
	Bands    []int     // "bands"; default 40
	FMaxHz   []float64 // "fmax", Hz, 0 meaning rate/2 ("nyquist"); default nyquist
	Arch     []string  // "arch"; default separable
	Width    []float64 // "width", multiplier; default 1
	Blocks   []int     // "blocks", separable only; default 3
	Overlap  []float64 // "overlap" of consecutive inference windows; default 0.5
	Method   []string  // "method", activation calibration; default auto
	Scheme   []string  // "scheme", weights; default per-channel
	Settings TrainSettings
}

// TrainSettings are the single-valued settings of a grid: how every job
// is trained and how long its model window is.
type TrainSettings struct {
	WindowSeconds float64 `json:"window_seconds"` // "seconds": audio per inference; default 1
	Epochs        int     `json:"epochs"`         // "epochs": maximum epochs per fold; default 10
	Batch         int     `json:"batch"`          // "batch"; default 32
	Patience      int     `json:"patience"`       // "patience", epochs without improvement; 0: never stop early; default 0
	LR            float64 `json:"lr"`             // "lr", peak learning rate; default 0.005
	Seed          uint64  `json:"seed"`           // "seed"; default 1
	Folds         int     `json:"folds"`          // "folds" to assign when the corpus has none; default 5
	Augment       bool    `json:"augment"`        // "augment" on|off; default on
	TrainOverlap  float64 `json:"train_overlap"`  // "train-overlap" of windows cut from training clips; default 0.5
}

// DefaultSettings returns the settings a grid file starts from.
func DefaultSettings() TrainSettings {
	return TrainSettings{WindowSeconds: 1, Epochs: 10, Batch: 32, LR: 0.005, Seed: 1, Folds: 5, Augment: true, TrainOverlap: 0.5}
}

// ParseGridFile reads and parses a grid file.
func ParseGridFile(path string) (*Grid, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return ParseGrid(path, f)
}

// ParseGrid parses the grid file format described in the package
// documentation; name labels errors.
func ParseGrid(name string, r io.Reader) (*Grid, error) {
	g := &Grid{Settings: DefaultSettings()}
	sc := bufio.NewScanner(io.LimitReader(r, 1<<20))
	seen := map[string]int{}
	line, header := 0, false
	for sc.Scan() {
		line++
		text := sc.Text()
		if i := strings.IndexByte(text, '#'); i >= 0 {
			text = text[:i]
		}
		words := strings.Fields(text)
		if len(words) == 0 {
			continue
		}
		bad := func(format string, a ...any) error {
			return fmt.Errorf("%s:%d: %s", name, line, fmt.Sprintf(format, a...))
		}
		if !header {
			if words[0] != GridFormat || len(words) != 2 || words[1] != "1" {
				return nil, bad("a grid file starts with the line %q", GridFormat+" 1")
			}
			header = true
			continue
		}
		key, vals := words[0], words[1:]
		if prev, ok := seen[key]; ok {
			return nil, bad("%q given again (first on line %d)", key, prev)
		}
		seen[key] = line
		if len(vals) == 0 {
			return nil, bad("%q has no values", key)
		}
		if err := g.set(key, vals); err != nil {
			return nil, bad("%s %s: %v", key, strings.Join(vals, " "), err)
		}
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("%s: %w", name, err)
	}
	if !header {
		return nil, fmt.Errorf("%s: empty grid file (want a first line %q)", name, GridFormat+" 1")
	}
	return g, nil
}

func ints(vals []string, lo, hi int) ([]int, error) {
	var out []int
	for _, v := range vals {
		n, err := strconv.Atoi(v)
		if err != nil || n < lo || n > hi {
			return nil, fmt.Errorf("%q is not a whole number in %d..%d", v, lo, hi)
		}
		out = append(out, n)
	}
	return distinct(out)
}

func floats(vals []string, lo, hi float64, openLo bool) ([]float64, error) {
	var out []float64
	for _, v := range vals {
		x, err := strconv.ParseFloat(v, 64)
		if err != nil || !(x >= lo && x <= hi) || (openLo && x == lo) {
			rng := fmt.Sprintf("[%g, %g]", lo, hi)
			if openLo {
				rng = fmt.Sprintf("(%g, %g]", lo, hi)
			}
			return nil, fmt.Errorf("%q is not a number in %s", v, rng)
		}
		out = append(out, x)
	}
	return distinct(out)
}

func oneOf(vals []string, allowed []string) ([]string, error) {
	for _, v := range vals {
		if !contains(allowed, v) {
			return nil, fmt.Errorf("%q: want one of %s", v, strings.Join(allowed, ", "))
		}
	}
	return distinct(vals)
}

func contains(s []string, v string) bool {
	for _, x := range s {
		if x == v {
			return true
		}
	}
	return false
}

func distinct[T comparable](v []T) ([]T, error) {
	seen := map[T]bool{}
	for _, x := range v {
		if seen[x] {
			return nil, fmt.Errorf("value %v listed twice", x)
		}
		seen[x] = true
	}
	return v, nil
}

func single(vals []string) (string, error) {
	if len(vals) != 1 {
		return "", fmt.Errorf("a setting takes one value, not %d", len(vals))
	}
	return vals[0], nil
}

// Methods and schemes a grid may name.
var (
	gridMethods = []string{quant.MethodMinMax, quant.MethodPercentile, quant.MethodMSE, quant.MethodAuto}
	gridSchemes = []string{quant.PerChannel, quant.PerTensor, SchemePow2}
)

// SchemePow2 names per-channel weights with power-of-two scales in a grid.
const SchemePow2 = "pow2"

func (g *Grid) set(key string, vals []string) error {
	var err error
	s := &g.Settings
	switch key {
	case "rate":
		g.RateHz, err = ints(vals, 1000, 192000)
	case "window":
		g.Window, err = ints(vals, 4, 1<<16)
	case "hop":
		g.Hop, err = ints(vals, 1, 1<<16)
	case "bands":
		g.Bands, err = ints(vals, 1, 512)
	case "fmax":
		for _, v := range vals {
			if v == "nyquist" {
				g.FMaxHz = append(g.FMaxHz, 0)
				continue
			}
			x, e := strconv.ParseFloat(v, 64)
			if e != nil || !(x > 0 && x <= 96000) {
				return fmt.Errorf("%q is neither nyquist nor a frequency in (0, 96000] Hz", v)
			}
			g.FMaxHz = append(g.FMaxHz, x)
		}
		_, err = distinct(g.FMaxHz)
	case "arch":
		g.Arch, err = oneOf(vals, nn.ArchNames())
	case "width":
		g.Width, err = floats(vals, 0, 8, true)
	case "blocks":
		g.Blocks, err = ints(vals, 1, nn.MaxSeparableBlocks)
	case "overlap":
		g.Overlap, err = floats(vals, 0, 0.95, false)
	case "method":
		g.Method, err = oneOf(vals, gridMethods)
	case "scheme":
		g.Scheme, err = oneOf(vals, gridSchemes)
	case "seconds", "epochs", "batch", "patience", "lr", "seed", "folds", "augment", "train-overlap":
		var v string
		if v, err = single(vals); err != nil {
			return err
		}
		err = s.set(key, v)
	default:
		return fmt.Errorf("unknown key (axes: %s; settings: %s)", strings.Join(axisKeys, ", "), strings.Join(settingKeys, ", "))
	}
	return err
}

var (
	axisKeys    = []string{"rate", "window", "hop", "bands", "fmax", "arch", "width", "blocks", "overlap", "method", "scheme"}
	settingKeys = []string{"seconds", "epochs", "batch", "patience", "lr", "seed", "folds", "augment", "train-overlap"}
)

func (s *TrainSettings) set(key, v string) error {
	num := func(lo, hi float64) (float64, error) {
		x, err := strconv.ParseFloat(v, 64)
		if err != nil || !(x >= lo && x <= hi) {
			return 0, fmt.Errorf("%q is not a number in [%g, %g]", v, lo, hi)
		}
		return x, nil
	}
	whole := func(lo, hi int) (int, error) {
		n, err := ints([]string{v}, lo, hi)
		if err != nil {
			return 0, err
		}
		return n[0], nil
	}
	var err error
	switch key {
	case "seconds":
		s.WindowSeconds, err = num(0.05, 60)
	case "epochs":
		s.Epochs, err = whole(1, 10000)
	case "batch":
		s.Batch, err = whole(1, 4096)
	case "patience":
		s.Patience, err = whole(0, 10000)
	case "lr":
		s.LR, err = num(1e-7, 1)
	case "seed":
		s.Seed, err = strconv.ParseUint(v, 10, 64)
		if err != nil {
			err = fmt.Errorf("%q is not a whole number ≥ 0", v)
		}
	case "folds":
		s.Folds, err = whole(3, 100)
	case "augment":
		switch v {
		case "on":
			s.Augment = true
		case "off":
			s.Augment = false
		default:
			err = fmt.Errorf("%q: want on or off", v)
		}
	case "train-overlap":
		s.TrainOverlap, err = num(0, 0.95)
	}
	return err
}

// Size is the number of combinations the grid spans before settings that
// do not apply (blocks of non-separable networks) are merged.
func (g *Grid) Size() int {
	n := 1
	for _, l := range []int{len(g.RateHz), len(g.Window), len(g.Hop), len(g.Bands), len(g.FMaxHz), len(g.Arch), len(g.Width), len(g.Blocks), len(g.Overlap), len(g.Method), len(g.Scheme)} {
		n *= max(l, 1)
	}
	return n
}

// sortedKeys returns m's keys sorted.
func sortedKeys[V any](m map[string]V) []string {
	var k []string
	for s := range m {
		k = append(k, s)
	}
	sort.Strings(k)
	return k
}

package datasets

import (
	"bytes"
	"encoding/csv"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
)

// Clip is one labelled recording, or a labelled span of one.
type Clip struct {
	ID    int     // index in Corpus.Clips
	Path  string  // file path as resolved (relative paths joined to the manifest's folder)
	Label int     // index into Corpus.Classes
	Fold  int     // fold index into Corpus.FoldLabels; meaningful when Corpus.HasFolds
	Start float64 // seconds; 0 when the manifest gives no span
	End   float64 // seconds; 0 means to the end of the file
	Group string  // source recording: clips sharing a group never straddle folds
	Line  int     // physical line of the manifest row (1-based, comments and blank lines counted); 0 for folder corpora
}

// Corpus is a set of labelled clips with their class names.
type Corpus struct {
	Source   string   // manifest path or folder
	Classes  []string // sorted class names
	Clips    []Clip
	HasFolds bool // folds came from the manifest or AssignFolds
	Folds    int  // number of folds when HasFolds
	// FoldLabels[k] is fold k's label as the manifest writes it ("1",
	// "dev", ...), or "0".."Folds-1" for folds from AssignFolds. Labels
	// that are all integers are in numeric order, others in string order.
	FoldLabels []string
}

// MaxFolds bounds the number of distinct folds a manifest may have.
const MaxFolds = 1000

// ReadManifest reads a CSV manifest with a header row naming at least the
// columns path and label, and optionally fold, start, end and the column
// named by groupColumn (empty: "group" if present). Paths are relative to
// the manifest's folder unless absolute; extra columns are ignored; lines
// starting with '#' are comments, and blank lines (or lines of only spaces
// and commas before the header) are skipped. The text is UTF-8; a byte-order
// mark at its start is skipped, and UTF-16 text is refused.
//
// Folds in the file are labels: integers from any start (1..10 as many
// public corpora number them) or any strings, at most [MaxFolds] of them;
// every row must then have one (see [Corpus.FoldLabels]). A clip's group is
// the group column if given, else its path, so spans cut from one file share
// a group.
//
// Paths are compared cleaned and resolved against the manifest's folder
// ("./a.wav" and "a.wav" are one file). A manifest is refused when it lists
// one clip (file and span) twice, gives one file two labels on overlapping
// spans (a row without a span covers the whole file), or puts one file in
// two folds; the error is at the later line and names the earlier. Every
// file must exist; errors name the manifest and the physical line of the row
// (comments and blank lines counted).
func ReadManifest(path, groupColumn string) (*Corpus, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	c, err := ParseManifest(path, data, filepath.Dir(path), groupColumn)
	if err != nil {
		return nil, err
	}
	for _, cl := range c.Clips {
		if _, err := os.Stat(cl.Path); err != nil {
			return nil, &ManifestError{Name: path, Line: cl.Line, Reason: fmt.Sprintf("file %s: %v", cl.Path, errors.Unwrap(err))}
		}
	}
	return c, nil
}

// ParseManifest parses manifest bytes (see [ReadManifest]) without touching
// the file system (beyond asking for the working folder, to compare relative
// and absolute paths); base is the folder relative paths are joined to. Line
// numbers in errors are physical lines of data, counting comments, blank
// lines and the lines of quoted fields that span several.
func ParseManifest(name string, data []byte, base, groupColumn string) (*Corpus, error) {
	data = bytes.TrimPrefix(data, []byte(utf8BOM))
	if bytes.HasPrefix(data, []byte("\xff\xfe")) || bytes.HasPrefix(data, []byte("\xfe\xff")) {
		return nil, &ManifestError{Name: name, Line: 1, Reason: "the file is UTF-16 text (it starts with a UTF-16 byte-order mark); save it as UTF-8"}
	}
	r := csv.NewReader(bytes.NewReader(data))
	r.Comment = '#'
	r.FieldsPerRecord = -1
	r.TrimLeadingSpace = true
	header, err := r.Read()
	for err == nil && blankRecord(header) { // lines of spaces or bare commas before the header
		header, err = r.Read()
	}
	if err == io.EOF {
		return nil, &ManifestError{Name: name, Line: 1, Reason: "empty manifest: no header row (the first row names the columns, at least path and label, then one row per clip)"}
	}
	if err != nil {
		return nil, &ManifestError{Name: name, Line: csvLine(err, 1), Reason: err.Error()}
	}
	headerLine, _ := r.FieldPos(0)
	col := map[string]int{}
	for i, h := range header {
		col[strings.ToLower(strings.TrimSpace(h))] = i
	}
	for _, need := range []string{"path", "label"} {
		if _, ok := col[need]; !ok {
			return nil, &ManifestError{Name: name, Line: headerLine, Reason: fmt.Sprintf("header %q has no %q column", strings.Join(header, ","), need)}
		}
	}
	if groupColumn == "" {
		if _, ok := col["group"]; ok {
			groupColumn = "group"
		}
	} else if _, ok := col[strings.ToLower(groupColumn)]; !ok {
		return nil, &ManifestError{Name: name, Line: headerLine, Reason: fmt.Sprintf("no group column %q", groupColumn)}
	}
	groupColumn = strings.ToLower(groupColumn)
	var rows []manifestRow
	cwd, _ := os.Getwd() // to compare relative and absolute paths; "" if unknown
	line := headerLine
	for {
		rec, err := r.Read()
		if err == io.EOF {
			break
		}
		if err != nil {
			return nil, &ManifestError{Name: name, Line: csvLine(err, line+1), Reason: err.Error()}
		}
		line, _ = r.FieldPos(0)
		get := func(k string) string {
			if i, ok := col[k]; ok && i < len(rec) {
				return strings.TrimSpace(rec[i])
			}
			return ""
		}
		rw := manifestRow{line: line, path: get("path"), label: get("label")}
		if rw.path == "" || rw.label == "" {
			return nil, &ManifestError{Name: name, Line: line, Reason: "empty path or label"}
		}
		rw.fold = get("fold")
		for _, k := range []string{"start", "end"} {
			if v := get(k); v != "" {
				x, err := strconv.ParseFloat(v, 64)
				if err != nil || x < 0 || math.IsInf(x, 0) || math.IsNaN(x) {
					return nil, &ManifestError{Name: name, Line: line, Reason: fmt.Sprintf("%s %q is not a non-negative number of seconds", k, v)}
				}
				if k == "start" {
					rw.start = x
				} else {
					rw.end = x
				}
			}
		}
		if rw.end != 0 && rw.end <= rw.start {
			return nil, &ManifestError{Name: name, Line: line, Reason: fmt.Sprintf("end %g s is not after start %g s", rw.end, rw.start)}
		}
		rw.raw = rw.path
		p := filepath.FromSlash(rw.path)
		if !filepath.IsAbs(p) {
			p = filepath.Join(base, p)
		}
		p = filepath.Clean(p)
		rw.path = p
		rw.file = p
		if !filepath.IsAbs(p) && cwd != "" {
			rw.file = filepath.Join(cwd, p)
		}
		rw.group = p
		if groupColumn != "" {
			if g := get(groupColumn); g != "" {
				rw.group = g
			}
		}
		rows = append(rows, rw)
	}
	if len(rows) == 0 {
		return nil, &ManifestError{Name: name, Line: headerLine, Reason: "no clips: the header is the only row (add one row per clip)"}
	}
	withFold := 0
	foldSeen := map[string]bool{}
	var foldLabels []string
	for _, rw := range rows {
		if rw.fold != "" {
			withFold++
			if !foldSeen[rw.fold] {
				if len(foldLabels) == MaxFolds {
					return nil, &ManifestError{Name: name, Line: rw.line, Reason: fmt.Sprintf("more than %d distinct folds", MaxFolds)}
				}
				foldSeen[rw.fold] = true
				foldLabels = append(foldLabels, rw.fold)
			}
		}
	}
	if withFold != 0 && withFold != len(rows) {
		for _, rw := range rows {
			if rw.fold == "" {
				return nil, &ManifestError{Name: name, Line: rw.line, Reason: "no fold, while other rows have one"}
			}
		}
	}
	if err := checkRows(name, rows); err != nil {
		return nil, err
	}
	sortFoldLabels(foldLabels)
	foldIndex := map[string]int{}
	for k, l := range foldLabels {
		foldIndex[l] = k
	}
	labels := map[string]bool{}
	for _, rw := range rows {
		labels[rw.label] = true
	}
	c := &Corpus{Source: name}
	for l := range labels {
		c.Classes = append(c.Classes, l)
	}
	sort.Strings(c.Classes)
	index := map[string]int{}
	for i, l := range c.Classes {
		index[l] = i
	}
	for i, rw := range rows {
		c.Clips = append(c.Clips, Clip{ID: i, Path: rw.path, Label: index[rw.label], Fold: foldIndex[rw.fold], Start: rw.start, End: rw.end, Group: rw.group, Line: rw.line})
	}
	if withFold > 0 {
		c.HasFolds, c.Folds, c.FoldLabels = true, len(foldLabels), foldLabels
		if err := c.checkFolds(); err != nil {
			return nil, fmt.Errorf("datasets: %s: %w", name, err)
		}
	}
	return c, nil
}

// manifestRow is one clip row of a manifest as read.
type manifestRow struct {
	line               int
	raw                string // path as written
	path, label, group string // path cleaned and joined to the manifest's folder
	file               string // path made absolute when the working folder is known, to compare files
	fold               string
	start, end         float64
}

// spanEnd returns the end of rw's span, +Inf for "to the end of the file".
func (rw manifestRow) spanEnd() float64 {
	if rw.end == 0 {
		return math.Inf(1)
	}
	return rw.end
}

// what describes rw's clip for an error: its path as written, and its
// span if it has one.
func (rw manifestRow) what() string {
	s := strconv.Quote(rw.raw)
	switch {
	case rw.end != 0:
		s += fmt.Sprintf(" %g–%g s", rw.start, rw.end)
	case rw.start != 0:
		s += fmt.Sprintf(" from %g s", rw.start)
	}
	return s
}

// checkRows refuses rows that list one clip (the same cleaned path and
// span) twice, give one file two labels on overlapping spans (a row
// without a span covers the whole file), or put one file in two folds.
// The error is at the later of the two lines and names the earlier.
func checkRows(name string, rows []manifestRow) error {
	type clipKey struct {
		path       string
		start, end float64
	}
	// conflict reports a problem kind ("label", "fold", "duplicate" or
	// "overlap") between two rows at the later one, naming the earlier.
	conflict := func(a, b manifestRow, kind string) error {
		if a.line > b.line {
			a, b = b, a
		}
		there := fmt.Sprintf("line %d", a.line)
		if a.what() != b.what() {
			there += " (" + a.what() + ")"
		}
		var reason string
		switch kind {
		case "duplicate":
			reason = fmt.Sprintf("%s duplicates %s: the same clip, label %q%s; remove one row", b.what(), there, b.label, foldNote(b.fold))
		case "label":
			reason = fmt.Sprintf("%s is labelled %q here and %q on %s: a clip has one label", b.what(), b.label, a.label, there)
		case "overlap":
			reason = fmt.Sprintf("%s (label %q) overlaps %s, labelled %q: a stretch of sound has one label", b.what(), b.label, there, a.label)
		default:
			reason = fmt.Sprintf("%s is in fold %q here and in fold %q on %s: one recording in two folds is leakage between training and test", b.what(), b.fold, a.fold, there)
		}
		return &ManifestError{Name: name, Line: b.line, Reason: reason}
	}
	first := map[clipKey]int{}
	fileFold := map[string]int{}
	byFile := map[string][]int{}
	var files []string
	for i, rw := range rows {
		k := clipKey{rw.file, rw.start, rw.end}
		if j, ok := first[k]; ok {
			p := rows[j]
			switch {
			case p.label != rw.label:
				return conflict(p, rw, "label")
			case p.fold != rw.fold:
				return conflict(p, rw, "fold")
			default:
				return conflict(p, rw, "duplicate")
			}
		}
		first[k] = i
		if j, ok := fileFold[rw.file]; ok && rows[j].fold != rw.fold {
			return conflict(rows[j], rw, "fold")
		} else if !ok {
			fileFold[rw.file] = i
		}
		if _, ok := byFile[rw.file]; !ok {
			files = append(files, rw.file)
		}
		byFile[rw.file] = append(byFile[rw.file], i)
	}
	// Overlapping spans of one file with different labels: sweep the
	// spans in start order against the one reaching furthest so far. If
	// any two overlapping spans differ in label, the first span (in this
	// order) overlapping an earlier one of another label also overlaps,
	// and differs from, the furthest-reaching span before it.
	for _, f := range files {
		idx := byFile[f]
		if len(idx) < 2 {
			continue
		}
		sort.SliceStable(idx, func(a, b int) bool { return rows[idx[a]].start < rows[idx[b]].start })
		reach := idx[0]
		for _, i := range idx[1:] {
			rw, m := rows[i], rows[reach]
			if rw.start < m.spanEnd() && rw.label != m.label {
				return conflict(m, rw, "overlap")
			}
			if rw.spanEnd() > m.spanEnd() {
				reach = i
			}
		}
	}
	return nil
}

// foldNote returns ", fold "f"" or "" without a fold.
func foldNote(fold string) string {
	if fold == "" {
		return ""
	}
	return fmt.Sprintf(", fold %q", fold)
}

// checkFolds verifies that every fold holds clips and no group spans two
// folds.
func (c *Corpus) checkFolds() error {
	count := make([]int, c.Folds)
	groupFold := map[string]int{}
	for _, cl := range c.Clips {
		if cl.Fold < 0 || cl.Fold >= c.Folds {
			return corpusErr("clip %s has fold index %d outside 0..%d", cl.Path, cl.Fold, c.Folds-1)
		}
		count[cl.Fold]++
		if f, ok := groupFold[cl.Group]; ok && f != cl.Fold {
			return corpusErr("group %q is in folds %s and %s: clips from one source recording must share a fold (leakage)", cl.Group, c.FoldLabel(f), c.FoldLabel(cl.Fold))
		}
		groupFold[cl.Group] = cl.Fold
	}
	for f, n := range count {
		if n == 0 {
			return corpusErr("fold %s holds no clips", c.FoldLabel(f))
		}
	}
	return nil
}

// utf8BOM is the UTF-8 byte-order mark some editors and spreadsheets
// write at the start of a text file.
const utf8BOM = "\ufeff"

// blankRecord reports whether every field of rec is empty or spaces.
func blankRecord(rec []string) bool {
	for _, f := range rec {
		if strings.TrimSpace(f) != "" {
			return false
		}
	}
	return true
}

// csvLine returns the physical line of a csv error, or def.
func csvLine(err error, def int) int {
	var pe *csv.ParseError
	if errors.As(err, &pe) && pe.Line > 0 {
		return pe.Line
	}
	return def
}

// sortFoldLabels orders labels numerically when every one is an integer,
// else as strings.
func sortFoldLabels(labels []string) {
	nums := make(map[string]int64, len(labels))
	for _, l := range labels {
		n, err := strconv.ParseInt(l, 10, 64)
		if err != nil {
			sort.Strings(labels)
			return
		}
		nums[l] = n
	}
	sort.Slice(labels, func(i, j int) bool { return nums[labels[i]] < nums[labels[j]] })
}

// ReadFolder reads a corpus laid out as one sub-folder per class holding
// .wav files (case-insensitive); sub-folders without WAV files are
// ignored, other files are ignored. Each file is its own group. It has no
// folds; use [Corpus.AssignFolds].
func ReadFolder(dir string) (*Corpus, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	c := &Corpus{Source: dir}
	for _, e := range ents {
		if !e.IsDir() {
			continue
		}
		files, err := os.ReadDir(filepath.Join(dir, e.Name()))
		if err != nil {
			return nil, fmt.Errorf("datasets: %w", err)
		}
		var wavs []string
		for _, f := range files {
			if !f.IsDir() && strings.EqualFold(filepath.Ext(f.Name()), ".wav") {
				wavs = append(wavs, filepath.Join(dir, e.Name(), f.Name()))
			}
		}
		if len(wavs) == 0 {
			continue
		}
		sort.Strings(wavs)
		label := len(c.Classes)
		c.Classes = append(c.Classes, e.Name())
		for _, p := range wavs {
			c.Clips = append(c.Clips, Clip{ID: len(c.Clips), Path: p, Label: label, Group: p})
		}
	}
	if len(c.Classes) < 2 {
		return nil, corpusErr("%s: found %d class folders with WAV files, need at least 2", dir, len(c.Classes))
	}
	return c, nil
}

// Open reads a manifest (a file) or a folder corpus (a directory).
func Open(path, groupColumn string) (*Corpus, error) {
	fi, err := os.Stat(path)
	if err != nil {
		return nil, fmt.Errorf("datasets: %w", err)
	}
	if fi.IsDir() {
		return ReadFolder(path)
	}
	return ReadManifest(path, groupColumn)
}

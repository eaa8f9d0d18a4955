package pipit

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
	"github.com/pipit-audio/pipit/quant/cref"
)

// CPrefix names the C identifiers of an exported model (pipit_net_blob,
// PIPIT_NET_POOL_BYTES, ...).
const CPrefix = "pipit_net"

// File names inside an export directory.
const (
	BlobFile   = "model.blob"
	SchemeFile = "model.scheme.json"
)

// ExportResult lists what [Export] wrote and the export's totals.
type ExportResult struct {
	Dir           string   `json:"dir"`
	Blob          string   `json:"blob"`
	Scheme        string   `json:"scheme"`
	Header        string   `json:"header"`
	Runtime       []string `json:"runtime"`
	FrontEnd      []string `json:"front_end,omitempty"` // generated header, pipit_fe.h, pipit_fe.c
	FrontEndRAM   int      `json:"front_end_ram_bytes,omitempty"`
	FrontEndFlash int      `json:"front_end_table_bytes,omitempty"`
	FrontEndNote  string   `json:"front_end_note,omitempty"` // why no C front end was written
	FlashBytes    int      `json:"flash_bytes"`
	WeightBytes   int      `json:"weight_bytes"`
	OverheadBytes int      `json:"overhead_bytes"`
	RAMBytes      int      `json:"ram_bytes"`
	MACs          int64    `json:"macs"`
	CRC32         string   `json:"crc32"`
	Seal          string   `json:"seal"`                // the export's seal (quant.SchemeDoc.Seal)
	Recovered     []string `json:"recovered,omitempty"` // what was cleaned up after killed runs
}

// Runtime files: the same in every export, from quant/cref.
var runtimeFiles = []struct {
	name string
	data []byte
}{{"pipit_rt.h", cref.RuntimeHeader}, {"pipit_rt.c", cref.RuntimeSource}, {"pipit_rt_fast.h", cref.FastRuntimeHeader}, {"pipit_rt_fast.c", cref.FastRuntimeSource}}

// frontEndFiles are the C front end's fixed files.
var frontEndFiles = []struct {
	name string
	data []byte
}{{"pipit_fe.h", cref.FrontEndHeader}, {"pipit_fe.c", cref.FrontEndSource}}

// exportSet is every file of q's export by name, with the report's
// figures (paths relative to the export directory).
func exportSet(q *quant.Model) (map[string][]byte, *ExportResult, *quant.SchemeDoc, error) {
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, nil, nil, err
	}
	r := &ExportResult{Blob: BlobFile, Scheme: SchemeFile, Header: CPrefix + ".h",
		FlashBytes: doc.Totals.FlashBytes, WeightBytes: doc.Totals.WeightBytes, OverheadBytes: doc.Totals.OverheadBytes,
		RAMBytes: doc.Totals.RAMBytes, MACs: doc.Totals.MACs, CRC32: doc.Blob.CRC32}
	files := map[string][]byte{BlobFile: blob}
	for _, f := range runtimeFiles {
		r.Runtime = append(r.Runtime, f.name)
		files[f.name] = f.data
	}
	doc.Headers = []quant.HeaderRef{{File: r.Header, Prefix: CPrefix, Kind: quant.HeaderNetwork}}
	fe, note, err := DeviceFrontEnd(q)
	if err != nil {
		return nil, nil, nil, err
	}
	if note != "" {
		r.FrontEndNote = note
	} else {
		_, lay, err := cref.FrontEndCHeader(fe, CPrefix)
		if err != nil {
			return nil, nil, nil, err
		}
		if doc.FrontEnd, err = json.Marshal(lay); err != nil {
			return nil, nil, nil, fmt.Errorf("pipit: %w", err)
		}
		doc.Headers = append(doc.Headers, quant.HeaderRef{File: lay.Header, Prefix: CPrefix, Kind: quant.HeaderFrontEnd})
		r.FrontEnd = []string{lay.Header}
		for _, f := range frontEndFiles {
			r.FrontEnd = append(r.FrontEnd, f.name)
			files[f.name] = f.data
		}
		r.FrontEndRAM, r.FrontEndFlash = lay.Cost.RAMBytes, lay.Cost.TableBytes
	}
	scheme, err := doc.MarshalScheme() // seals the scheme: the headers record the seal
	if err != nil {
		return nil, nil, nil, err
	}
	files[SchemeFile] = scheme
	files[r.Header] = []byte(quant.CHeader(blob, doc, CPrefix))
	if note == "" {
		fe.Seal = doc.Seal
		hdr, _, err := cref.FrontEndCHeader(fe, CPrefix)
		if err != nil {
			return nil, nil, nil, err
		}
		files[r.FrontEnd[0]] = []byte(hdr)
	}
	r.Seal = doc.Seal
	return files, r, doc, nil
}

// withDir makes r's file names paths under dir.
func (r *ExportResult) withDir(dir string) {
	r.Dir = dir
	j := func(p *string) { *p = filepath.Join(dir, *p) }
	j(&r.Blob)
	j(&r.Scheme)
	j(&r.Header)
	for i := range r.Runtime {
		j(&r.Runtime[i])
	}
	for i := range r.FrontEnd {
		j(&r.FrontEnd[i])
	}
}

// Export writes q's export into dir: the blob, the scheme description,
// the C header of the network, the C reference runtime and, when q
// records a front end the C front end supports, the C front end with its
// generated tables. The set is written as a whole: into a new sibling
// directory .NAME.tmp-N, read back with [OpenExport], then put in dir's
// place by rename (internal/fsutil.ReplaceDir), so dir always holds one
// complete export, the earlier or the new one, even if the process is
// killed. An existing dir must be an export (hold only files an export
// writes); anything else is refused. What killed runs left beside dir is
// cleaned first ([RecoverExport]) and reported in Recovered. A result
// without error is an export the integer engine can run.
func Export(q *quant.Model, dir string) (*ExportResult, error) {
	files, r, _, err := exportSet(q)
	if err != nil {
		return nil, err
	}
	notes, err := fsutil.ReplaceDir(dir, fsutil.ReplaceOptions{
		Write: func(tmp string) error {
			for name, data := range files {
				if err := fsutil.WriteFile(filepath.Join(tmp, name), data); err != nil {
					return fmt.Errorf("pipit: %w", err)
				}
			}
			// Read back what was written: the files, not the memory, are the export.
			if _, err := OpenExport(tmp); err != nil {
				return fmt.Errorf("pipit: export check: %w", err)
			}
			return nil
		},
		Replaceable: replaceableExport,
		Complete:    func(d string) error { _, err := OpenExport(d); return err },
	})
	if err != nil {
		return nil, fmt.Errorf("pipit: export: %w", err)
	}
	r.withDir(dir)
	r.Recovered = notes
	return r, nil
}

// exportNames are the files an export may hold.
func exportNames() map[string]bool {
	n := map[string]bool{BlobFile: true, SchemeFile: true, CPrefix + ".h": true, CPrefix + "_fe.h": true}
	for _, f := range runtimeFiles {
		n[f.name] = true
	}
	for _, f := range frontEndFiles {
		n[f.name] = true
	}
	return n
}

// replaceableExport returns nil if dir holds nothing but files an export
// writes (and the temporary files an earlier per-file writer could leave,
// .NAME.tmpN), so replacing it loses nothing else.
func replaceableExport(dir string) error {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return err
	}
	names := exportNames()
	var foreign []string
	for _, e := range ents {
		n := e.Name()
		if base, _, ok := strings.Cut(strings.TrimPrefix(n, "."), ".tmp"); ok && strings.HasPrefix(n, ".") && names[base] {
			n = base
		}
		if !names[n] || !e.Type().IsRegular() {
			foreign = append(foreign, e.Name())
		}
	}
	if len(foreign) == 0 {
		return nil
	}
	more := ""
	if len(foreign) > 5 {
		more = fmt.Sprintf(" and %d more", len(foreign)-5)
		foreign = foreign[:5]
	}
	return fmt.Errorf("%s is not a pipit export (it holds %s%s), and an export replaces the whole directory; give a new or empty directory", dir, strings.Join(foreign, ", "), more)
}

// OpenExport reads the export in dir and checks that it is complete and
// one set: the blob and scheme as [quant.ImportFiles] checks them, and
// every other file exactly as this pipit writes it for the model they
// hold (the headers record the scheme's seal). Errors name the file at
// fault. It returns the model.
func OpenExport(dir string) (*quant.Model, error) {
	if _, err := os.Stat(dir); os.IsNotExist(err) {
		if olds, _ := filepath.Glob(filepath.Join(filepath.Dir(dir), "."+filepath.Base(dir)+".old-*")); len(olds) > 0 {
			return nil, fmt.Errorf("pipit: %s does not exist; a killed pipit export left the previous export in %s, which the next pipit export to %s (or RecoverExport) puts back", dir, olds[0], dir)
		}
	}
	q, doc, err := quant.ImportSet(filepath.Join(dir, BlobFile), filepath.Join(dir, SchemeFile))
	if err != nil {
		return nil, err
	}
	files, _, want, err := exportSet(q)
	if err != nil {
		return nil, err
	}
	if want.Seal != doc.Seal {
		return nil, fmt.Errorf("pipit: %s: not the scheme this pipit writes for the model it describes (seal %.12s…, rewritten %.12s…); export the model again", filepath.Join(dir, SchemeFile), doc.Seal, want.Seal)
	}
	names := make([]string, 0, len(files))
	for n := range files {
		names = append(names, n)
	}
	sort.Strings(names)
	for _, n := range names {
		if n == SchemeFile {
			continue
		}
		p := filepath.Join(dir, n)
		got, err := os.ReadFile(p)
		switch {
		case os.IsNotExist(err):
			return nil, fmt.Errorf("pipit: %s: missing; the export is incomplete", p)
		case err != nil:
			return nil, fmt.Errorf("pipit: %w", err)
		case bytes.Equal(got, files[n]):
			continue
		}
		if strings.HasSuffix(n, ".h") && quant.HeaderSeal(files[n]) != "" {
			if s := quant.HeaderSeal(got); s != doc.Seal {
				return nil, fmt.Errorf("pipit: %s: sealed %.12s…, %s %.12s…: the files come from different exports", p, s, SchemeFile, doc.Seal)
			}
			return nil, fmt.Errorf("pipit: %s: differs from the header this export's blob and scheme make (edited after export?)", p)
		}
		return nil, fmt.Errorf("pipit: %s: differs from the file this pipit writes (edited, or written by another pipit version)", p)
	}
	return q, nil
}

// RecoverExport repairs what killed [Export] runs left beside dir (see
// internal/fsutil.RecoverDir): it removes their temporary directories
// .NAME.tmp-N and, when dir is missing because a run was killed between
// its two renames, puts back the previous export from .NAME.old-N if it
// is complete ([OpenExport]). It returns what it did, one note each.
// Export calls it first.
func RecoverExport(dir string) ([]string, error) {
	notes, err := fsutil.RecoverDir(dir, func(d string) error { _, err := OpenExport(d); return err })
	if err != nil {
		return notes, fmt.Errorf("pipit: %w", err)
	}
	return notes, nil
}

// DeviceFrontEnd returns the C front end of q from its model info (front
// end, band statistics, window). For a model without model info or with
// an FFT size the C front end does not support, note says why there is
// none and err is nil.
func DeviceFrontEnd(q *quant.Model) (fe cref.FrontEnd, note string, err error) {
	if len(q.Meta) == 0 {
		return fe, "no C front end: the model records no front end", nil
	}
	info, err := datasets.ParseModelInfo("model", q.Meta)
	if err != nil {
		return fe, "", err
	}
	if n := info.FrontEnd.FFTSize; n&(n-1) != 0 {
		return fe, fmt.Sprintf("no C front end: FFT size %d is not a power of two", n), nil
	}
	return cref.FrontEnd{Config: info.FrontEnd, Stats: info.Stats, InputScale: q.InputQ.Scale, InputZeroPoint: q.InputQ.ZeroPoint,
		Frames: info.Window.Frames, HopFrames: info.Window.HopFrames()}, "", nil
}

// WholePath is the budget of front end + network, resource by resource.
// Compute charges each front-end floating-point operation as one
// multiply-accumulate of the profile's budget (conservative: a Cortex-M4F
// issues most single-precision operations in one cycle, while the
// profile's MAC rate assumes several cycles per int8 MAC).
type WholePath struct {
	ComputePerSecond float64 `json:"compute_per_second"` // network MAC/s + front-end flop/s
	RAMBytes         int64   `json:"ram_bytes"`          // pool + front-end buffers
	FlashBytes       int64   `json:"flash_bytes"`        // weights + front-end tables + code
	CodeBytes        int64   `json:"code_bytes"`         // runtime + front end, measured (see nn.RuntimeCodeBytes)
	ComputeUse       float64 `json:"compute_use"`
	RAMUse           float64 `json:"ram_use"`
	FlashUse         float64 `json:"flash_use"`
	ComputeFits      bool    `json:"compute_fits"`
	RAMFits          bool    `json:"ram_fits"`
	FlashFits        bool    `json:"flash_fits"`
	Fits             bool    `json:"fits"`
}

// NewWholePath adds the C front end's cost fe to the network's cost c
// (with its verdict v at the inference rate) and judges the sum against p.
func NewWholePath(c nn.CostReport, v nn.Verdict, fe features.DeviceCost, p nn.Profile) WholePath {
	w := WholePath{ComputePerSecond: v.MACsPerSecond + fe.FlopsPerSecond, RAMBytes: c.RAMBytes + int64(fe.RAMBytes),
		CodeBytes: nn.RuntimeCodeBytes + features.FrontEndCodeBytes}
	w.FlashBytes = c.FlashBytes + int64(fe.TableBytes) + w.CodeBytes
	w.ComputeUse, w.RAMUse, w.FlashUse = w.ComputePerSecond/p.MACsPerSecond, float64(w.RAMBytes)/float64(p.RAMBytes), float64(w.FlashBytes)/float64(p.FlashBytes)
	w.ComputeFits, w.RAMFits, w.FlashFits = w.ComputeUse <= 1, w.RAMUse <= 1, w.FlashUse <= 1
	w.Fits = w.ComputeFits && w.RAMFits && w.FlashFits
	return w
}

package pipit

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

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
	Seal          string   `json:"seal"`
	Recovered     []string `json:"recovered,omitempty"`
}

// Export writes q into dir (created if needed): the blob, the scheme
// description, the C header of the network, the C reference runtime and,
// when q records a front end the C front end supports, the C front end
// with its generated tables. Every file is written atomically; the blob
// and scheme are then read back from disk and imported, so a result
// without error is an export the integer engine can run.
func Export(q *quant.Model, dir string) (*ExportResult, error) {
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, fmt.Errorf("pipit: %w", err)
	}
	r := &ExportResult{Dir: dir, Blob: filepath.Join(dir, BlobFile), Scheme: filepath.Join(dir, SchemeFile), Header: filepath.Join(dir, CPrefix+".h"),
		Runtime:    []string{filepath.Join(dir, "pipit_rt.h"), filepath.Join(dir, "pipit_rt.c"), filepath.Join(dir, "pipit_rt_fast.h"), filepath.Join(dir, "pipit_rt_fast.c")},
		FlashBytes: doc.Totals.FlashBytes, WeightBytes: doc.Totals.WeightBytes, OverheadBytes: doc.Totals.OverheadBytes,
		RAMBytes: doc.Totals.RAMBytes, MACs: doc.Totals.MACs, CRC32: doc.Blob.CRC32}
	files := map[string][]byte{r.Blob: blob, r.Header: []byte(quant.CHeader(blob, doc, CPrefix)),
		r.Runtime[0]: cref.RuntimeHeader, r.Runtime[1]: cref.RuntimeSource, r.Runtime[2]: cref.FastRuntimeHeader, r.Runtime[3]: cref.FastRuntimeSource}
	fe, note, err := DeviceFrontEnd(q)
	if err != nil {
		return nil, err
	}
	if note != "" {
		r.FrontEndNote = note
	} else {
		hdr, lay, err := cref.FrontEndCHeader(fe, CPrefix)
		if err != nil {
			return nil, err
		}
		if doc.FrontEnd, err = json.Marshal(lay); err != nil {
			return nil, fmt.Errorf("pipit: %w", err)
		}
		r.FrontEnd = []string{filepath.Join(dir, lay.Header), filepath.Join(dir, "pipit_fe.h"), filepath.Join(dir, "pipit_fe.c")}
		r.FrontEndRAM, r.FrontEndFlash = lay.Cost.RAMBytes, lay.Cost.TableBytes
		files[r.FrontEnd[0]], files[r.FrontEnd[1]], files[r.FrontEnd[2]] = []byte(hdr), cref.FrontEndHeader, cref.FrontEndSource
	}
	scheme, err := doc.MarshalScheme()
	if err != nil {
		return nil, err
	}
	files[r.Scheme] = scheme
	for path, data := range files {
		if err := fsutil.WriteFile(path, data); err != nil {
			return nil, fmt.Errorf("pipit: %w", err)
		}
	}
	// Read back what was written: the files, not the memory, are the export.
	if _, err := quant.ImportFiles(r.Blob, r.Scheme); err != nil {
		return nil, fmt.Errorf("pipit: export check: %w", err)
	}
	return r, nil
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

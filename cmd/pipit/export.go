package main

import (
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/quant"
	"github.com/pipit-audio/pipit/quant/cref"
)

type exportReport struct {
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
}

// cPrefix names the C identifiers of an exported model.
const cPrefix = "pipit_net"

func newExportCmd() *cobra.Command {
	var model, out string
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "export --model QMODEL --out DIR",
		Short: "Write a quantised model as weight blob, scheme description and C header",
		Long: `export writes, into DIR:
  model.blob         flat little-endian weights blob (int8 weights, int32 bias,
                     multipliers and shifts, CRC-32, section table)
  model.scheme.json  the scheme description: front end, input quantisation,
                     layers in execution order, memory plan, totals
  pipit_net.h        the blob as a const array, the layer table and #defines
  pipit_rt.h/.c      the C99 reference runtime that runs pipit_net.h
  pipit_rt_fast.h/.c faster kernels computing the same bits (Cortex-M4 DSP
                     extension; portable C elsewhere), beside the reference
  pipit_net_fe.h     the front end's tables (window, twiddles, mel triangles,
                     band statistics, input quantisation) for pipit_fe.c
  pipit_fe.h/.c      the C99 front end: 16-bit PCM in, int8 network input out
The format is documented in docs/export-format.md.`,
		Args: cobra.NoArgs,
	}
	cmd.Flags().StringVar(&model, "model", "", "quantised model written by pipit quantize (required)")
	cmd.Flags().StringVar(&out, "out", "", "output directory (required)")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.MarkFlagRequired("model")
	cmd.MarkFlagRequired("out")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		q, err := quant.ReadModelFile(model)
		if err != nil {
			return err
		}
		rep, err := runExport(q, out)
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printExport(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

func runExport(q *quant.Model, dir string) (*exportReport, error) {
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, err
	}
	scheme, err := doc.MarshalScheme()
	if err != nil {
		return nil, err
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, err
	}
	rep := &exportReport{Dir: dir, Blob: filepath.Join(dir, "model.blob"), Scheme: filepath.Join(dir, "model.scheme.json"), Header: filepath.Join(dir, cPrefix+".h"),
		Runtime:    []string{filepath.Join(dir, "pipit_rt.h"), filepath.Join(dir, "pipit_rt.c"), filepath.Join(dir, "pipit_rt_fast.h"), filepath.Join(dir, "pipit_rt_fast.c")},
		FlashBytes: doc.Totals.FlashBytes, WeightBytes: doc.Totals.WeightBytes, OverheadBytes: doc.Totals.OverheadBytes,
		RAMBytes: doc.Totals.RAMBytes, MACs: doc.Totals.MACs, CRC32: doc.Blob.CRC32}
	files := map[string][]byte{rep.Blob: blob, rep.Header: []byte(quant.CHeader(blob, doc, cPrefix)),
		rep.Runtime[0]: cref.RuntimeHeader, rep.Runtime[1]: cref.RuntimeSource, rep.Runtime[2]: cref.FastRuntimeHeader, rep.Runtime[3]: cref.FastRuntimeSource}
	if fe, note, err := deviceFrontEnd(q); err != nil {
		return nil, err
	} else if note != "" {
		rep.FrontEndNote = note
	} else {
		hdr, lay, err := cref.FrontEndCHeader(fe, cPrefix)
		if err != nil {
			return nil, err
		}
		if doc.FrontEnd, err = json.Marshal(lay); err != nil {
			return nil, err
		}
		rep.FrontEnd = []string{filepath.Join(dir, lay.Header), filepath.Join(dir, "pipit_fe.h"), filepath.Join(dir, "pipit_fe.c")}
		rep.FrontEndRAM, rep.FrontEndFlash = lay.Cost.RAMBytes, lay.Cost.TableBytes
		files[rep.FrontEnd[0]], files[rep.FrontEnd[1]], files[rep.FrontEnd[2]] = []byte(hdr), cref.FrontEndHeader, cref.FrontEndSource
		if scheme, err = doc.MarshalScheme(); err != nil {
			return nil, err
		}
	}
	files[rep.Scheme] = scheme
	for path, data := range files {
		if err := fsutil.WriteFile(path, data); err != nil {
			return nil, err
		}
	}
	// Read back what was written: the files, not the memory, are the export.
	if _, err := quant.ImportFiles(rep.Blob, rep.Scheme); err != nil {
		return nil, fmt.Errorf("export check: %w", err)
	}
	return rep, nil
}

// deviceFrontEnd returns the C front end of a quantised model from its
// model info (front end, band statistics, window); ok is false for a model
// without model info (one not trained by pipit train) or with an FFT size
// the C front end does not support, note says why there is none.
func deviceFrontEnd(q *quant.Model) (fe cref.FrontEnd, note string, err error) {
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

func printExport(w io.Writer, r *exportReport) {
	fmt.Fprintf(w, "exported to %s:\n  %s (%d bytes: %d int8 weights + %d bytes of bias, multipliers, shifts, header and table; CRC-32 %s)\n  %s\n  %s, %s, %s\n",
		r.Dir, r.Blob, r.FlashBytes, r.WeightBytes, r.OverheadBytes, r.CRC32, r.Scheme, r.Header, r.Runtime[0], r.Runtime[1])
	fmt.Fprintf(w, "RAM pool %d bytes, %d MACs per inference\n", r.RAMBytes, r.MACs)
	if r.FrontEndNote != "" {
		fmt.Fprintln(w, r.FrontEndNote)
	}
	if len(r.FrontEnd) > 0 {
		fmt.Fprintf(w, "C front end %s, %s, %s: %d bytes of RAM, %d bytes of tables\n", r.FrontEnd[0], r.FrontEnd[1], r.FrontEnd[2], r.FrontEndRAM, r.FrontEndFlash)
	}
}

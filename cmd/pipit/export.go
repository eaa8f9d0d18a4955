package main

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"

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
		Runtime:    []string{filepath.Join(dir, "pipit_rt.h"), filepath.Join(dir, "pipit_rt.c")},
		FlashBytes: doc.Totals.FlashBytes, WeightBytes: doc.Totals.WeightBytes, OverheadBytes: doc.Totals.OverheadBytes,
		RAMBytes: doc.Totals.RAMBytes, MACs: doc.Totals.MACs, CRC32: doc.Blob.CRC32}
	for path, data := range map[string][]byte{rep.Blob: blob, rep.Scheme: scheme, rep.Header: []byte(quant.CHeader(blob, doc, cPrefix)),
		rep.Runtime[0]: cref.RuntimeHeader, rep.Runtime[1]: cref.RuntimeSource} {
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

func printExport(w io.Writer, r *exportReport) {
	fmt.Fprintf(w, "exported to %s:\n  %s (%d bytes: %d int8 weights + %d bytes of bias, multipliers, shifts, header and table; CRC-32 %s)\n  %s\n  %s, %s, %s\n",
		r.Dir, r.Blob, r.FlashBytes, r.WeightBytes, r.OverheadBytes, r.CRC32, r.Scheme, r.Header, r.Runtime[0], r.Runtime[1])
	fmt.Fprintf(w, "RAM pool %d bytes, %d MACs per inference\n", r.RAMBytes, r.MACs)
}

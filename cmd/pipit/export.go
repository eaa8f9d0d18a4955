package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/quant"
)

type exportReport = pipit.ExportResult

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
  pipit_net_fe.h     the front end's tables (window, twiddles, mel triangles,
                     band statistics, input quantisation) for pipit_fe.c
  pipit_fe.h/.c      the C99 front end: 16-bit PCM in, int8 network input out
The scheme and both generated headers record one seal (a SHA-256 over the
scheme's content, which includes the blob's SHA-256); an edited scheme or a
file of another export is refused on import.

DIR is written as a whole: the files go into a new directory beside it
(.DIR.tmp-N), are read back, and then replace DIR in one rename, so DIR holds
the earlier export or the new one even if export is killed. An existing DIR
must be an export (only the files above); anything else is refused.
Leftovers of killed runs beside DIR are removed first.
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
		rep, err := pipit.Export(q, out)
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

func printExport(w io.Writer, r *exportReport) {
	for _, n := range r.Recovered {
		fmt.Fprintln(w, n)
	}
	fmt.Fprintf(w, "exported to %s:\n  %s (%d bytes: %d int8 weights + %d bytes of bias, multipliers, shifts, header and table; CRC-32 %s)\n  %s\n  %s, %s, %s\n",
		r.Dir, r.Blob, r.FlashBytes, r.WeightBytes, r.OverheadBytes, r.CRC32, r.Scheme, r.Header, r.Runtime[0], r.Runtime[1])
	fmt.Fprintf(w, "RAM pool %d bytes, %d MACs per inference; seal %s\n", r.RAMBytes, r.MACs, r.Seal)
	if r.FrontEndNote != "" {
		fmt.Fprintln(w, r.FrontEndNote)
	}
	if len(r.FrontEnd) > 0 {
		fmt.Fprintf(w, "C front end %s, %s, %s: %d bytes of RAM, %d bytes of tables\n", r.FrontEnd[0], r.FrontEnd[1], r.FrontEnd[2], r.FrontEndRAM, r.FrontEndFlash)
	}
}

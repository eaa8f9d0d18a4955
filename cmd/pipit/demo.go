package main

import (
	"fmt"
	"io"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/nn"
)

type demoReport = pipit.DemoReport

func newDemoCmd() *cobra.Command {
	var out, cc string
	var asJSON bool
	var epochs int
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run the whole path on built-in demo data: corpus → training → int8 → export → C check",
		Long: `demo needs no input. It generates the synthetic timber-yard corpus, trains
the separable network with fold 0 held out, prints its cost against the
m4-half profile, calibrates it to int8, evaluates float and int8 on the
held-out fold, exports blob + scheme + C header, compiles the C reference
runtime and runs it on test windows to show it computes the same bits as
the Go engine, and prints a summary. It exits non-zero if any step fails.`,
		Args: cobra.NoArgs,
	}
	cmd.Flags().StringVar(&out, "out", "pipit-demo", "output directory")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the summary as JSON")
	cmd.Flags().IntVar(&epochs, "epochs", 40, "maximum training epochs")
	cmd.Flags().StringVar(&cc, "cc", "gcc", "C compiler for the bit-exactness check")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		rep, err := pipit.Demo(pipit.DemoConfig{Dir: out, CC: cc, Epochs: epochs}, newReporter(cmd.ErrOrStderr()))
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printDemo(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

func printDemo(w io.Writer, r *demoReport) {
	fits := func(ok bool) string {
		if ok {
			return "fits"
		}
		return "DOES NOT FIT"
	}
	p, _ := nn.LookupProfile(r.Profile)
	fmt.Fprintf(w, "\npipit demo: timber-yard monitor, %s network, held-out fold 0\n\n", r.Arch)
	tw := tabwriter.NewWriter(w, 0, 0, 3, ' ', 0)
	fmt.Fprintf(tw, "  \tfloat\tint8\t\n")
	fmt.Fprintf(tw, "  accuracy, windows\t%.3f\t%.3f\t\n", r.FloatAccuracy, r.Int8Accuracy)
	fmt.Fprintf(tw, "  accuracy, clips\t%.3f\t%.3f\t\n", r.FloatClipAcc, r.Int8ClipAcc)
	fmt.Fprintf(tw, "  \t\t\t\n  resource\tneeds\t%s budget\tverdict\n", r.Profile)
	fmt.Fprintf(tw, "  compute (50%% overlap)\t%.0f MAC/s\t%.1f M MAC/s\t%s\n", r.MACsPerSecond, p.MACsPerSecond/1e6, fits(r.ComputeFits))
	fmt.Fprintf(tw, "  flash (blob)\t%d B\t%d KiB\t%s\n", r.FlashBytes, p.FlashBytes>>10, fits(r.FlashFits))
	fmt.Fprintf(tw, "  RAM (pool)\t%d B\t%d KiB\t%s\n", r.RAMBytes, p.RAMBytes>>10, fits(r.RAMFits))
	tw.Flush()
	wp := r.WholePath
	fmt.Fprintf(w, "\n  whole path (C front end %.0f flop/s, %d B RAM, %d B tables; code %d B):\n", r.FrontEnd.FlopsPerSecond, r.FrontEnd.RAMBytes, r.FrontEnd.TableBytes, wp.CodeBytes)
	tw = tabwriter.NewWriter(w, 0, 0, 3, ' ', 0)
	fmt.Fprintf(tw, "  compute\t%.0f /s\t%.1f M/s\t%s\n", wp.ComputePerSecond, p.MACsPerSecond/1e6, fits(wp.ComputeFits))
	fmt.Fprintf(tw, "  flash\t%d B\t%d KiB\t%s\n", wp.FlashBytes, p.FlashBytes>>10, fits(wp.FlashFits))
	fmt.Fprintf(tw, "  RAM\t%d B\t%d KiB\t%s\n", wp.RAMBytes, p.RAMBytes>>10, fits(wp.RAMFits))
	tw.Flush()
	fmt.Fprintf(w, "\n  MACs per inference   %d (%d parameters)\n", r.MACs, r.Params)
	fmt.Fprintf(w, "  C reference          %s on %d test windows, every layer\n", map[bool]string{true: "bit-exact", false: "DIFFERS"}[r.BitExact], r.BitExactWindows)
	fmt.Fprintf(w, "  export round trip    identical logits on all %d test windows\n", r.RoundTripWindows)
	if fc := r.FrontEndTest; fc != nil {
		fmt.Fprintf(w, "  C front end          %d/%d int8 features as Go's (worst %d LSB), %d/%d same predictions on the test windows\n",
			fc.Identical, fc.Values, fc.WorstLSB, fc.SamePredictions, fc.Windows)
	}
	if oc := r.Onchip; oc != nil {
		fmt.Fprintf(w, "  emulated Cortex-M4   logits %s; code %d B, const %d B, static RAM %d B, stack %d B\n",
			map[bool]string{true: "bit-exact", false: "DIFFER"}[oc.LogitsBitExact && oc.RecLogitsExact], oc.Sizes.RuntimeCode+oc.Sizes.FrontEndCode, oc.ConstBytes, oc.StaticRAM, oc.StackBytes)
		fmt.Fprintf(w, "                       %.0f instructions/frame, %.0f /inference (%.2f per MAC); QEMU counts instructions, not cycles\n",
			oc.InstrPerFrame, oc.InstrPerInference, oc.InstrPerMAC)
		fmt.Fprintf(w, "                       fast kernels: logits %s, %.0f /inference (%.2f per MAC)\n",
			map[bool]string{true: "bit-exact", false: "DIFFER"}[oc.FastLogitsBitExact], oc.FastInstrPerInference, oc.FastInstrPerMAC)
	} else if r.OnchipNote != "" {
		fmt.Fprintf(w, "  emulated Cortex-M4   %s\n", r.OnchipNote)
	}
	fmt.Fprintf(w, "  files                %s, %s, %s/\n", r.Model, r.QModel, r.Export)
	fmt.Fprintf(w, "  time                 %.1f s\n", r.Seconds)
}

package main

import (
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/quant"
)

type onchipReport = pipit.OnchipReport

func newOnchipCmd() *cobra.Command {
	var model, wav, dir string
	var inputs, chunk int
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "onchip --model QMODEL --wav RECORDING.wav",
		Short: "Cross-compile front end + network for a Cortex-M4 and run them on an emulated board",
		Long: `onchip exports a quantised model (network and C front end), cross-compiles
it with a small harness for a Cortex-M4F (arm-none-eabi-gcc, -mcpu=cortex-m4
-mthumb -mfpu=fpv4-sp-d16 -mfloat-abi=hard -O2), runs it under QEMU's
mps2-an386 board with semihosting, and reports: whether the network's logits
equal the Go integer engine's bit for bit (on --inputs inputs made by the Go
front end from the recording, and on the inputs the C front end made on the
emulated core), how the core's front end compares with Go's, the toolchain's
sizes against the cost model, the stack high-water mark, and instructions
per frame, per inference and per MAC. QEMU models instructions, not cycles:
instruction counts are not timings. Needs gcc-arm-none-eabi,
libnewlib-arm-none-eabi and qemu-system-arm.`,
		Args: cobra.NoArgs,
	}
	cmd.Flags().StringVar(&model, "model", "", "quantised model written by pipit quantize (required)")
	cmd.Flags().StringVar(&wav, "wav", "", "recording to run through the front end (required)")
	cmd.Flags().IntVar(&inputs, "inputs", 4, "network inputs run layer by layer")
	cmd.Flags().IntVar(&chunk, "chunk", 160, "samples per push into the front end (a DMA block)")
	cmd.Flags().StringVar(&dir, "out", "", "build directory (default: a temporary one, removed afterwards)")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.MarkFlagRequired("model")
	cmd.MarkFlagRequired("wav")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		q, err := quant.ReadModelFile(model)
		if err != nil {
			return err
		}
		a, err := features.ReadWAVFile(wav)
		if err != nil {
			return err
		}
		if dir == "" {
			if dir, err = os.MkdirTemp("", "pipit-onchip-"); err != nil {
				return err
			}
			defer os.RemoveAll(dir)
		}
		rep, err := pipit.Onchip(q, a, inputs, chunk, dir)
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printOnchip(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

func printOnchip(w io.Writer, r *onchipReport) {
	ok := map[bool]string{true: "bit-exact", false: "DIFFER"}
	fmt.Fprintf(w, "emulated Cortex-M4: %s\n  %s\n\n", r.Machine, r.Flags)
	fmt.Fprintf(w, "  network logits, %d test inputs        %s with the Go engine\n", r.TestInputs, ok[r.LogitsBitExact])
	fmt.Fprintf(w, "  front end + network, %d inputs         logits %s; features %d/%d identical to Go (worst %d LSB); %d/%d same predictions\n",
		r.RecordingInputs, ok[r.RecLogitsExact], r.FeaturesSame, r.FeaturesTotal, r.FeaturesWorstLSB, r.SamePredictions, r.RecordingInputs)
	fmt.Fprintf(w, "\n  size (arm-none-eabi-size/nm)   measured   cost model\n")
	fmt.Fprintf(w, "  code: runtime + front end      %8d   %8d\n", r.Sizes.RuntimeCode+r.Sizes.FrontEndCode, r.CodeModel)
	fmt.Fprintf(w, "  const: blob, layers, tables    %8d   %8d\n", r.ConstBytes, r.ConstModel)
	fmt.Fprintf(w, "  static RAM: pool + front end   %8d   %8d\n", r.StaticRAM, r.StaticRAMModel)
	fmt.Fprintf(w, "  stack high-water mark          %8d   (painted)\n", r.StackBytes)
	fmt.Fprintf(w, "\n  instructions (QEMU counts instructions, not cycles)\n")
	fmt.Fprintf(w, "  front end   %10.0f per frame (%.2f per flop)\n", r.InstrPerFrame, r.InstrPerFlop)
	fmt.Fprintf(w, "  network     %10.0f per inference (%.2f per MAC)\n", r.InstrPerInference, r.InstrPerMAC)
	fmt.Fprintf(w, "  per layer, per MAC:")
	for i, v := range r.LayerInstrPerMAC {
		if v > 0 {
			fmt.Fprintf(w, " %d:%.2f", i, v)
		}
	}
	fmt.Fprintf(w, "\n  whole path  %10.0f per second of audio\n", r.InstrPerSecond)
	fmt.Fprintf(w, "\n  fast kernels (pipit_rt_fast.c, DSP extension): logits %s; requantisation %d/%d cases as the reference\n",
		ok[r.FastLogitsBitExact], r.FastRequantChecked-r.FastRequantDiffer, r.FastRequantChecked)
	fmt.Fprintf(w, "  network     %10.0f per inference (%.2f per MAC), %d B scratch, %d B code\n", r.FastInstrPerInference, r.FastInstrPerMAC, r.FastScratchBytes, r.Sizes.FastCode)
	fmt.Fprintf(w, "  per layer, per MAC:")
	for i, v := range r.FastLayerInstrPerMAC {
		if v > 0 {
			fmt.Fprintf(w, " %d:%.2f", i, v)
		}
	}
	fmt.Fprintln(w)
}

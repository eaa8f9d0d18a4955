package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

type budgetReport struct {
	Arch             string         `json:"arch"`
	Classes          int            `json:"classes"`
	Input            string         `json:"input_shape"`
	ElemBytes        int            `json:"elem_bytes"`
	WindowSeconds    float64        `json:"window_seconds"`
	Overlap          float64        `json:"overlap"`
	InferencesPerSec float64        `json:"inferences_per_second"`
	MACs             int64          `json:"macs"`
	Params           int            `json:"params"`
	FlashBytes       int64          `json:"flash_bytes"`
	RAMBytes         int64          `json:"ram_bytes"`
	MACsPerSecond    float64        `json:"macs_per_second"`
	Fits             bool           `json:"fits"`
	Verdict          nn.Verdict     `json:"verdict"`
	Layers           []nn.LayerCost `json:"layers"`
	PeakLayer        int            `json:"peak_layer"`
	ProfileNote      string         `json:"profile_note"`
	// The whole path: the C front end (features.CostOnDevice) beside the
	// network. Fits above is the whole path's verdict; Verdict is the
	// network's alone.
	FrontEndConfig features.Config     `json:"front_end_config"`
	FrontEnd       features.DeviceCost `json:"front_end"`
	WholePath      pipit.WholePath     `json:"whole_path"`
}

// netForFrontEnd builds the network a front end feeds: a built-in
// architecture is rebuilt on (bands, frames of one window, 1), so that the
// front-end settings move the network's cost too; a spec file keeps its
// input, whose H must equal the bands (taken from the spec when --bands is
// not given).
func netForFrontEnd(arch string, classes int, cfg *features.Config, bandsSet bool, secs float64) (*nn.Network, error) {
	for _, name := range nn.ArchNames() {
		if arch != name {
			continue
		}
		spec, err := nn.ArchSpec(arch, classes)
		if err != nil {
			return nil, err
		}
		frames := cfg.Frames(int(math.Round(secs * float64(cfg.SampleRateHz))))
		if frames < 1 {
			return nil, fmt.Errorf("--seconds %g is shorter than one %d-sample window", secs, cfg.WindowSamples)
		}
		_, body, _ := strings.Cut(spec, "\n") // drop the input line
		return nn.FromSpec(body, nn.Shape{H: cfg.Bands, W: frames, C: 1}, 1)
	}
	net, err := pipit.NewNetwork(arch, classes, 1)
	if err != nil {
		return nil, err
	}
	if !bandsSet {
		cfg.Bands = net.Input.H
	}
	if net.Input.H != cfg.Bands || net.Input.C != 1 {
		net.Close()
		return nil, fmt.Errorf("%s: network input %v does not take %d bands × frames × 1 (set --bands)", arch, net.Input, cfg.Bands)
	}
	return net, nil
}

func newBudgetCmd() *cobra.Command {
	var (
		arch, profile string
		classes, elem int
		overlap, secs float64
		asJSON        bool
	)
	cmd := &cobra.Command{
		Use:   "budget --arch NAME|FILE",
		Short: "Print a network's per-layer cost and whether it fits a device profile",
		Long: `budget prints, layer by layer, the multiply-accumulates, parameters and
output activation size of a network, its totals (MACs, flash, peak RAM
under a two-buffer plan), MACs per second when windows of --seconds overlap
by --overlap, the C front end's cost (floating-point operations per second
at the front end's hop, its RAM and tables) and a fits / does-not-fit
verdict per resource for the whole path (front end + network) against a
device profile. --arch is a built-in architecture (pooled, strided,
separable), rebuilt on the input the front-end flags give (40x61x1 at the
defaults), or a layer-spec file with an "input" line. --elem 1 (default)
costs the int8 deployment, --elem 4 float32.`,
		Args: cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&arch, "arch", "separable", "built-in architecture name or layer-spec file")
	f.IntVar(&classes, "classes", 8, "number of classes (built-in architectures)")
	f.StringVar(&profile, "profile", "m4-half", "device profile: "+strings.Join(nn.ProfileNames(), ", "))
	f.Float64Var(&overlap, "overlap", 0.5, "overlap of consecutive windows, 0 ≤ overlap < 1")
	f.Float64Var(&secs, "seconds", 1.0, "audio window per inference, seconds")
	f.IntVar(&elem, "elem", 1, "bytes per activation and weight value: 1 (int8) or 4 (float32)")
	f.BoolVar(&asJSON, "json", false, "print the report as JSON")
	fe := addFrontEndFlags(cmd)
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		if elem != 1 && elem != 4 {
			return fmt.Errorf("--elem %d: want 1 or 4", elem)
		}
		p, err := nn.LookupProfile(profile)
		if err != nil {
			return err
		}
		ips, err := nn.InferencesPerSecond(secs, overlap)
		if err != nil {
			return err
		}
		cfg := fe.cfg
		cfg.FMaxHz = 0 // completed by fe.resolve below; only the FFT size matters before
		cfg = cfg.Complete()
		net, err := netForFrontEnd(arch, classes, &cfg, cmd.Flags().Changed("bands"), secs)
		if err != nil {
			return err
		}
		defer net.Close()
		if cfg, err = fe.resolve(cfg); err != nil {
			return err
		}
		fc, err := features.CostOnDevice(cfg, net.Input.W)
		if err != nil {
			return err
		}
		c := nn.Cost(net, elem)
		v := c.Check(p, ips)
		whole := pipit.NewWholePath(c, v, fc, p)
		rep := budgetReport{
			Arch: arch, Classes: net.Output().Size(), Input: net.Input.String(), ElemBytes: elem,
			WindowSeconds: secs, Overlap: overlap, InferencesPerSec: ips,
			MACs: c.MACs, Params: c.Params, FlashBytes: c.FlashBytes, RAMBytes: c.RAMBytes,
			MACsPerSecond: v.MACsPerSecond, Fits: whole.Fits, Verdict: v, Layers: c.Layers, PeakLayer: c.PeakLayer,
			ProfileNote: p.Note, FrontEndConfig: cfg, FrontEnd: fc, WholePath: whole,
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printBudget(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

func yesNo(ok bool) string {
	if ok {
		return "fits"
	}
	return "DOES NOT FIT"
}

func printBudget(w io.Writer, r budgetReport) {
	fmt.Fprintf(w, "network %s, input %s, %d outputs, %d-byte values\n\n", r.Arch, r.Input, r.Classes, r.ElemBytes)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "#\tlayer\toutput\tMACs\tparams\tout bytes\t")
	for _, l := range r.Layers {
		mark := ""
		if l.InPlace {
			mark = " (in place)"
		}
		if l.Index == r.PeakLayer {
			mark = " ← RAM peak"
		}
		fmt.Fprintf(tw, "%d\t%s\t%s\t%d\t%d\t%d\t%s\n", l.Index, l.Kind, l.OutShape, l.MACs, l.Params, l.OutBytes, mark)
	}
	tw.Flush()
	v := r.Verdict
	fmt.Fprintf(w, "\ntotals: %d MACs per inference, %d parameters\n", r.MACs, r.Params)
	fmt.Fprintf(w, "rate:   %.2f inferences/s (%.2f s windows, %.0f%% overlap) → %.0f MAC/s\n\n", r.InferencesPerSec, r.WindowSeconds, 100*r.Overlap, r.MACsPerSecond)
	fmt.Fprintf(w, "against %s (%s):\n", v.Profile.Name, v.Profile.Note)
	fmt.Fprintf(w, "  RAM      %8d of %8d bytes  %5.1f%%  %s\n", r.RAMBytes, v.Profile.RAMBytes, 100*v.RAMUse, yesNo(v.RAMFits))
	fmt.Fprintf(w, "  flash    %8d of %8d bytes  %5.1f%%  %s\n", r.FlashBytes, v.Profile.FlashBytes, 100*v.FlashUse, yesNo(v.FlashFits))
	fmt.Fprintf(w, "  compute  %8.0f of %8.0f MAC/s  %5.1f%%  %s\n", r.MACsPerSecond, v.Profile.MACsPerSecond, 100*v.ComputeUse, yesNo(v.ComputeFits))
	fmt.Fprintf(w, "network alone: %s\n\n", map[bool]string{true: "fits", false: "does not fit"}[v.Fits])
	printWholePath(w, r.FrontEndConfig, r.FrontEnd, r.WholePath, r.MACsPerSecond, r.RAMBytes, r.FlashBytes, v.Profile)
}

// printWholePath prints the front end beside the network, per resource.
func printWholePath(w io.Writer, cfg features.Config, fe features.DeviceCost, wp pipit.WholePath, netMACs float64, netRAM, netFlash int64, p nn.Profile) {
	fmt.Fprintf(w, "whole path, C front end %d Hz, window %d, hop %d, FFT %d, %d bands (%.2f frames/s, %d flops/frame):\n",
		cfg.SampleRateHz, cfg.WindowSamples, cfg.HopSamples, cfg.FFTSize, cfg.Bands, fe.FramesPerSecond, fe.FlopsPerFrame)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "resource\tfront end\tnetwork\tcode\twhole path\tbudget\tuse\t\t")
	fmt.Fprintf(tw, "compute /s\t%.0f flop\t%.0f MAC\t\t%.0f\t%.0f\t%.1f%%\t%s\t\n", fe.FlopsPerSecond, netMACs, wp.ComputePerSecond, p.MACsPerSecond, 100*wp.ComputeUse, yesNo(wp.ComputeFits))
	fmt.Fprintf(tw, "RAM bytes\t%d\t%d\t\t%d\t%d\t%.1f%%\t%s\t\n", fe.RAMBytes, netRAM, wp.RAMBytes, p.RAMBytes, 100*wp.RAMUse, yesNo(wp.RAMFits))
	fmt.Fprintf(tw, "flash bytes\t%d\t%d\t%d\t%d\t%d\t%.1f%%\t%s\t\n", fe.TableBytes, netFlash, wp.CodeBytes, wp.FlashBytes, p.FlashBytes, 100*wp.FlashUse, yesNo(wp.FlashFits))
	tw.Flush()
	fmt.Fprintf(w, "(front-end flops charged one MAC each; front-end RAM: audio ring %d, FFT work %d, log-mel %d, feature window %d, state %d)\n",
		fe.RingBytes, fe.WorkBytes, fe.LogMelBytes, fe.FeatureBytes, fe.StateBytes)
	fmt.Fprintf(w, "verdict: %s\n", map[bool]string{true: "fits", false: "does not fit"}[wp.Fits])
}

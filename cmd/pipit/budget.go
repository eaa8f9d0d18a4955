package main

import (
	"fmt"
	"io"
	"os"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

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
}

// loadArch builds a built-in architecture by name or a network from a
// layer-spec file.
func loadArch(arch string, classes int, seed uint64) (*nn.Network, error) {
	for _, name := range nn.ArchNames() {
		if arch == name {
			return nn.Arch(arch, classes, seed)
		}
	}
	text, err := os.ReadFile(arch)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("--arch %q is neither a built-in architecture (%s) nor a spec file", arch, strings.Join(nn.ArchNames(), ", "))
		}
		return nil, err
	}
	net, err := nn.FromSpec(string(text), nn.Shape{}, seed)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", arch, err)
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
by --overlap, and a fits / does-not-fit verdict per resource against a
device profile. --arch is a built-in architecture (pooled, strided,
separable; input 40x61x1) or a layer-spec file with an "input" line.
--elem 1 (default) costs the int8 deployment, --elem 4 float32.`,
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
		net, err := loadArch(arch, classes, 1)
		if err != nil {
			return err
		}
		defer net.Close()
		c := nn.Cost(net, elem)
		v := c.Check(p, ips)
		rep := budgetReport{
			Arch: arch, Classes: net.Output().Size(), Input: net.Input.String(), ElemBytes: elem,
			WindowSeconds: secs, Overlap: overlap, InferencesPerSec: ips,
			MACs: c.MACs, Params: c.Params, FlashBytes: c.FlashBytes, RAMBytes: c.RAMBytes,
			MACsPerSecond: v.MACsPerSecond, Fits: v.Fits, Verdict: v, Layers: c.Layers, PeakLayer: c.PeakLayer,
			ProfileNote: p.Note,
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
	fmt.Fprintf(w, "verdict: %s\n", map[bool]string{true: "fits", false: "does not fit"}[v.Fits])
}

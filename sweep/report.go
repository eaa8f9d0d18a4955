package sweep

import (
	"encoding/json"
	"fmt"
	"image/color"
	"io"
	"sort"
	"strings"
	"text/tabwriter"

	"gonum.org/v1/plot/vg/draw"

	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
)

// Row is one job of a report.
type Row struct {
	Index                int          `json:"index"`
	Label                string       `json:"label"`
	RateHz               int          `json:"rate_hz"`
	Window               int          `json:"window"`
	Hop                  int          `json:"hop"`
	Bands                int          `json:"bands"`
	FMaxHz               float64      `json:"fmax_hz"`
	Overlap              float64      `json:"overlap"`
	Arch                 string       `json:"arch"`
	Knobs                nn.ArchKnobs `json:"knobs"`
	Input                string       `json:"input"`
	Method               string       `json:"method"`
	Scheme               string       `json:"scheme"`
	NetworkMACsPerSecond float64      `json:"network_macs_per_second"`
	ComputePerSecond     float64      `json:"compute_per_second"` // whole path
	RAMBytes             int64        `json:"ram_bytes"`
	FlashBytes           int64        `json:"flash_bytes"`
	Fits                 bool         `json:"fits"`
	Done                 bool         `json:"done"`
	Float                *MeanSD      `json:"float_accuracy,omitempty"`
	Int8                 *MeanSD      `json:"int8_accuracy,omitempty"`
	Gap                  *float64     `json:"int8_gap,omitempty"`
	Epochs               int          `json:"epochs,omitempty"`
	Promoted             *bool        `json:"promoted,omitempty"` // halving only
	Front                bool         `json:"pareto_front"`
}

// Report is the deterministic merge of a sweep directory: the same bytes
// whatever order the jobs finished in (rows by job index, no timings).
type Report struct {
	Format   string         `json:"format"`
	Profile  nn.Profile     `json:"profile"`
	Settings TrainSettings  `json:"settings"`
	Points   int            `json:"grid_points"`
	Pruned   int            `json:"pruned"`
	PrunedBy map[string]int `json:"pruned_by"`
	Rows     []Row          `json:"rows"`
	Missing  []int          `json:"missing"` // jobs without a valid result
	Front    []int          `json:"pareto_front"`
	Halving  *HalvingReport `json:"halving,omitempty"`
}

// HalvingReport is the saving of successive halving in fold-epochs.
type HalvingReport struct {
	Eta             int     `json:"eta"`
	RungEpochs      int     `json:"rung_epochs"`
	Promoted        []int   `json:"promoted"`
	EpochBudget     int     `json:"fold_epoch_budget"`
	FullEpochBudget int     `json:"full_grid_fold_epoch_budget"`
	Saving          float64 `json:"saving"` // 1 − budget/full
}

// ReportFormat tags a report's JSON.
const ReportFormat = "pipit-sweep-report/1"

// Merge reads the plan and every valid result in dir into a report.
func Merge(dir string) (*Report, error) {
	p, err := ReadPlan(dir)
	if err != nil {
		return nil, err
	}
	rep := &Report{Format: ReportFormat, Profile: p.Profile, Settings: p.Settings, Points: p.GridPoints, Pruned: len(p.Pruned),
		PrunedBy: p.PrunedBy, Missing: []int{}, Front: []int{}}
	eta, rungEpochs := 0, 0
	var promoted []int
	budget, full := 0, 0
	for i := range p.Jobs {
		j, sum, err := ReadJob(dir, i)
		if err != nil {
			return nil, err
		}
		fe := j.FrontEnd
		row := Row{Index: i, Label: j.Label, RateHz: fe.SampleRateHz, Window: fe.WindowSamples, Hop: fe.HopSamples, Bands: fe.Bands, FMaxHz: fe.FMaxHz,
			Overlap: j.Overlap, Arch: j.Arch, Knobs: j.Knobs, Input: fmt.Sprintf("%dx%dx1", fe.Bands, j.InputFrames), Method: j.Method, Scheme: j.Scheme,
			NetworkMACsPerSecond: j.Cost.NetworkMACsPerSecond, ComputePerSecond: j.Cost.ComputePerSecond, RAMBytes: j.Cost.RAMBytes, FlashBytes: j.Cost.FlashBytes, Fits: j.Cost.Fits}
		full += j.Folds * j.Train.Epochs
		if r, _ := readResult(ResultPath(dir, i), j, sum); r != nil {
			row.Done = true
			f, q, g := r.Float, r.Int8, r.Gap
			row.Float, row.Int8, row.Gap, row.Epochs = &f, &q, &g, r.Epochs
			if r.Halving >= 2 {
				eta = r.Halving
				rungEpochs = RungEpochs(j.Train.Epochs, eta)
				pr := r.Promoted
				row.Promoted = &pr
				budget += j.Folds * rungEpochs
				if pr {
					promoted = append(promoted, i)
					budget += j.Folds * j.Train.Epochs
				}
			}
		} else {
			rep.Missing = append(rep.Missing, i)
		}
		rep.Rows = append(rep.Rows, row)
	}
	if eta > 0 {
		if promoted == nil {
			promoted = []int{}
		}
		rep.Halving = &HalvingReport{Eta: eta, RungEpochs: rungEpochs, Promoted: promoted, EpochBudget: budget, FullEpochBudget: full,
			Saving: 1 - float64(budget)/float64(full)}
	}
	markFront(rep)
	return rep, nil
}

// ParetoFront returns the indices into rows of the points that no other
// point dominates, among those with ok set: a point is dominated by one
// with compute ≤ and accuracy ≥, at least one strictly. Equal points are
// all on the front.
func ParetoFront(compute, accuracy []float64, ok []bool) []int {
	var front []int
	for i := range compute {
		if !ok[i] {
			continue
		}
		dominated := false
		for k := range compute {
			if k == i || !ok[k] {
				continue
			}
			if compute[k] <= compute[i] && accuracy[k] >= accuracy[i] && (compute[k] < compute[i] || accuracy[k] > accuracy[i]) {
				dominated = true
				break
			}
		}
		if !dominated {
			front = append(front, i)
		}
	}
	return front
}

func markFront(rep *Report) {
	n := len(rep.Rows)
	c, a, ok := make([]float64, n), make([]float64, n), make([]bool, n)
	for i, r := range rep.Rows {
		c[i] = r.ComputePerSecond
		ok[i] = r.Fits && r.Done
		if r.Done {
			a[i] = r.Int8.Mean
		}
	}
	for _, i := range ParetoFront(c, a, ok) {
		rep.Rows[i].Front = true
		rep.Front = append(rep.Front, rep.Rows[i].Index)
	}
}

// WriteJSON writes the report as indented JSON.
func (r *Report) WriteJSON(w io.Writer) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	_, err = w.Write(append(b, '\n'))
	return err
}

func pm(m *MeanSD) string {
	if m == nil {
		return "–"
	}
	return fmt.Sprintf("%.3f ± %.3f", m.Mean, m.SD)
}

// WriteTable writes the report as a text table, the Pareto front marked
// with "◆".
func (r *Report) WriteTable(w io.Writer) error {
	fmt.Fprintf(w, "sweep against %s (%s)\n", r.Profile.Name, r.Profile.Note)
	fmt.Fprintf(w, "%d grid points, %d pruned before training", r.Points, r.Pruned)
	if len(r.PrunedBy) > 0 {
		var parts []string
		for _, k := range sortedKeys(r.PrunedBy) {
			parts = append(parts, fmt.Sprintf("%s %d", k, r.PrunedBy[k]))
		}
		fmt.Fprintf(w, " (over: %s)", strings.Join(parts, ", "))
	}
	fmt.Fprintf(w, ", %d jobs, %d without a result\n", len(r.Rows), len(r.Missing))
	fmt.Fprintf(w, "cross-validated over folds, %d epochs at most; accuracy on test-fold windows, mean ± sd over folds\n\n", r.Settings.Epochs)
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "job\trate\twin\thop\tbands\tfmax\tnetwork\tinput\tnet MAC/s\tpath /s\tRAM\tflash\tfits\tfloat\tint8\tgap\tfront\t")
	for _, x := range r.Rows {
		net := fmt.Sprintf("%s ×%g", x.Arch, max(x.Knobs.Width, 0))
		if x.Knobs.Blocks > 0 {
			net += fmt.Sprintf(" %db", x.Knobs.Blocks)
		}
		gap := "–"
		if x.Gap != nil {
			gap = fmt.Sprintf("%+.3f", 0-*x.Gap+0) // +0: no "-0.000"
			if gap == "-0.000" {
				gap = "+0.000"
			}
		}
		fits := "yes"
		if !x.Fits {
			fits = "NO"
		}
		mark := ""
		if x.Front {
			mark = "◆"
		}
		if x.Promoted != nil && !*x.Promoted {
			mark += " (rung 0)"
		}
		fmt.Fprintf(tw, "%d\t%g k\t%d\t%d\t%d\t%g\t%s\t%s\t%.3g M\t%.3g M\t%.1f K\t%.1f K\t%s\t%s\t%s\t%s\t%s\t\n",
			x.Index, float64(x.RateHz)/1000, x.Window, x.Hop, x.Bands, x.FMaxHz, net, x.Input, x.NetworkMACsPerSecond/1e6, x.ComputePerSecond/1e6,
			float64(x.RAMBytes)/1024, float64(x.FlashBytes)/1024, fits, pm(x.Float), pm(x.Int8), gap, mark)
	}
	if err := tw.Flush(); err != nil {
		return err
	}
	fmt.Fprintf(w, "\nnet MAC/s: the int8 network at the window overlap; path /s: network MACs + front-end flops (one MAC each) per second,\n")
	fmt.Fprintf(w, "against the budget of %.3g M MAC/s; RAM and flash: whole path in KiB; gap: int8 − float accuracy.\n", r.Profile.MACsPerSecond/1e6)
	fmt.Fprintf(w, "◆ Pareto front of int8 accuracy against path compute among models that fit: %v\n", r.Front)
	if h := r.Halving; h != nil {
		fmt.Fprintf(w, "successive halving (η = %d): every job %d epochs, then %d jobs %d epochs; %d of %d fold-epochs budgeted, a saving of %.0f %%\n",
			h.Eta, h.RungEpochs, len(h.Promoted), r.Settings.Epochs, h.EpochBudget, h.FullEpochBudget, 100*h.Saving)
	}
	return nil
}

// Figure returns the scatter of mean int8 accuracy against whole-path
// compute per second, the budget as a vertical line and the front joined.
func (r *Report) Figure() plots.Scatter {
	var fit, unfit, front plots.Points
	fit = plots.Points{Name: "fits", Color: color.RGBA{R: 40, G: 90, B: 200, A: 255}}
	unfit = plots.Points{Name: "over budget", Color: color.Gray{Y: 150}, Shape: draw.CrossGlyph{}}
	front = plots.Points{Name: "Pareto front", Color: color.RGBA{R: 230, G: 120, A: 255}, Shape: draw.PyramidGlyph{}, Size: 5}
	var fx, fy []float64
	type pt struct{ x, y float64 }
	var fr []pt
	for _, x := range r.Rows {
		if !x.Done {
			continue
		}
		cx, cy := x.ComputePerSecond/1e6, x.Int8.Mean
		switch {
		case x.Front:
			front.X, front.Y = append(front.X, cx), append(front.Y, cy)
			fr = append(fr, pt{cx, cy})
		case x.Fits:
			fit.X, fit.Y = append(fit.X, cx), append(fit.Y, cy)
		default:
			unfit.X, unfit.Y = append(unfit.X, cx), append(unfit.Y, cy)
		}
	}
	sort.Slice(fr, func(a, b int) bool { return fr[a].x < fr[b].x || (fr[a].x == fr[b].x && fr[a].y < fr[b].y) })
	for _, p := range fr {
		fx, fy = append(fx, p.x), append(fy, p.y)
	}
	return plots.Scatter{
		Title:  fmt.Sprintf("int8 accuracy against compute (%s)", r.Profile.Name),
		XLabel: "whole-path compute, M MAC/s (log scale)", YLabel: "int8 accuracy, mean over folds",
		Points: []plots.Points{fit, unfit, front},
		Lines:  []plots.Series{{Name: "front", X: fx, Y: fy}},
		VLines: []plots.VLine{{Name: "compute budget", X: r.Profile.MACsPerSecond / 1e6}},
		LogX:   true,
	}
}

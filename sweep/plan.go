package sweep

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
)

// Format tags of the files a sweep directory holds.
const (
	JobFormat    = "pipit-sweep-job/1"
	ResultFormat = "pipit-sweep-result/1"
	PlanFormat   = "pipit-sweep-plan/1"
)

// Job is one point of the grid: a self-contained description of what to
// train and how to judge it. It is written as DIR/jobs/job-NNNN.json.
type Job struct {
	Format        string          `json:"format"`
	Index         int             `json:"index"`
	Label         string          `json:"label"`
	Data          string          `json:"data"` // manifest or class folders, absolute
	Group         string          `json:"group,omitempty"`
	Classes       []string        `json:"classes"`
	Folds         int             `json:"folds"` // cross-validation: one model per fold
	FrontEnd      features.Config `json:"front_end"`
	Overlap       float64         `json:"overlap"` // of consecutive inference windows on the device
	Arch          string          `json:"arch"`
	Knobs         nn.ArchKnobs    `json:"knobs"`
	NetSpec       string          `json:"net_spec"` // layer spec with its input line
	Method        string          `json:"method"`
	Scheme        string          `json:"scheme"`
	Train         TrainSettings   `json:"train"`
	Profile       nn.Profile      `json:"profile"`
	Cost          Cost            `json:"cost"`
	Unfit         bool            `json:"unfit,omitempty"` // trained although the cost exceeds the profile
	InputFrames   int             `json:"input_frames"`
	InferencesSec float64         `json:"inferences_per_second"`
}

// QuantConfig returns the quantisation settings of j.
func (j *Job) QuantConfig() quant.Config {
	s := quant.Scheme{Weights: j.Scheme}
	if j.Scheme == SchemePow2 {
		s = quant.Scheme{Weights: quant.PerChannel, Pow2: true}
	}
	return quant.Config{Method: j.Method, Scheme: s}
}

// Cost is the whole-path cost of a job on the device: the C front end
// (features.CostOnDevice) beside the int8 network (nn.Cost), combined the
// way "pipit budget" does: each front-end floating-point operation is
// charged as one multiply-accumulate of the profile's budget, RAM is the
// network's pool plus the front end's buffers, flash the weights plus the
// front-end tables plus the measured code of both.
type Cost struct {
	NetworkMACs          int64   `json:"network_macs"` // per inference
	Params               int     `json:"params"`
	NetworkMACsPerSecond float64 `json:"network_macs_per_second"`
	FrontEndFlopsPerSec  float64 `json:"front_end_flops_per_second"`
	ComputePerSecond     float64 `json:"compute_per_second"` // whole path
	RAMBytes             int64   `json:"ram_bytes"`          // whole path
	FlashBytes           int64   `json:"flash_bytes"`        // whole path
	ComputeFits          bool    `json:"compute_fits"`
	RAMFits              bool    `json:"ram_fits"`
	FlashFits            bool    `json:"flash_fits"`
	Fits                 bool    `json:"fits"`
}

// WholePathCost combines the int8 network cost c run at inferencesPerSec
// with the front-end cost fe and compares the sum with p.
func WholePathCost(c nn.CostReport, inferencesPerSec float64, fe features.DeviceCost, p nn.Profile) Cost {
	k := Cost{NetworkMACs: c.MACs, Params: c.Params, NetworkMACsPerSecond: float64(c.MACs) * inferencesPerSec, FrontEndFlopsPerSec: fe.FlopsPerSecond}
	k.ComputePerSecond = k.NetworkMACsPerSecond + fe.FlopsPerSecond
	k.RAMBytes = c.RAMBytes + int64(fe.RAMBytes)
	k.FlashBytes = c.FlashBytes + int64(fe.TableBytes) + nn.RuntimeCodeBytes + features.FrontEndCodeBytes
	k.ComputeFits = k.ComputePerSecond <= p.MACsPerSecond
	k.RAMFits = k.RAMBytes <= p.RAMBytes
	k.FlashFits = k.FlashBytes <= p.FlashBytes
	k.Fits = k.ComputeFits && k.RAMFits && k.FlashFits
	return k
}

// PlanInput is what a plan needs besides the grid.
type PlanInput struct {
	Data      string   // corpus path as given (made absolute in the jobs)
	Group     string   // manifest column of source recordings, or ""
	Classes   []string // the corpus's classes
	Folds     int      // the corpus's folds (after assignment)
	Profile   nn.Profile
	KeepUnfit bool // write jobs that exceed the profile too (marked unfit)
}

// Pruned is a grid point that was not made a job.
type Pruned struct {
	Label  string   `json:"label"`
	Reason []string `json:"reason"` // "compute", "ram", "flash" or "invalid: …"
	Cost   *Cost    `json:"cost,omitempty"`
}

// Plan is the expansion of a grid: the jobs to run and the points pruned.
type Plan struct {
	Format     string         `json:"format"`
	Profile    nn.Profile     `json:"profile"`
	GridPoints int            `json:"grid_points"` // after merging points that differ only in knobs that do not apply
	Jobs       []*Job         `json:"-"`
	JobLabels  []string       `json:"jobs"`
	Pruned     []Pruned       `json:"pruned"`
	PrunedBy   map[string]int `json:"pruned_by"` // resource → points over it (a point can be over several)
	Settings   TrainSettings  `json:"settings"`
}

// Expand turns g into jobs for in, pruning points whose whole-path cost
// exceeds the profile (unless in.KeepUnfit) or whose settings are invalid.
func Expand(g *Grid, in PlanInput) (*Plan, error) {
	if len(in.Classes) < 2 {
		return nil, fmt.Errorf("sweep: the corpus has %d classes, want at least 2", len(in.Classes))
	}
	if in.Folds < 3 {
		return nil, fmt.Errorf("sweep: cross-validation needs at least 3 folds (test, validation, training), the corpus has %d", in.Folds)
	}
	data, err := filepath.Abs(in.Data)
	if err != nil {
		return nil, err
	}
	pick := func(a []int, d int) []int {
		if len(a) == 0 {
			return []int{d}
		}
		return a
	}
	pickF := func(a []float64, d float64) []float64 {
		if len(a) == 0 {
			return []float64{d}
		}
		return a
	}
	pickS := func(a []string, d string) []string {
		if len(a) == 0 {
			return []string{d}
		}
		return a
	}
	fe0 := features.DefaultConfig()
	p := &Plan{Format: PlanFormat, Profile: in.Profile, PrunedBy: map[string]int{}, Settings: g.Settings}
	seen := map[string]bool{}
	for _, rate := range pick(g.RateHz, fe0.SampleRateHz) {
		for _, win := range pick(g.Window, fe0.WindowSamples) {
			for _, hop := range pick(g.Hop, fe0.HopSamples) {
				for _, bands := range pick(g.Bands, fe0.Bands) {
					for _, fmax := range pickF(g.FMaxHz, 0) {
						for _, arch := range pickS(g.Arch, "separable") {
							for _, width := range pickF(g.Width, 1) {
								for _, blocks := range pick(g.Blocks, 3) {
									for _, ov := range pickF(g.Overlap, 0.5) {
										for _, method := range pickS(g.Method, quant.MethodAuto) {
											for _, scheme := range pickS(g.Scheme, quant.PerChannel) {
												if arch != "separable" {
													blocks = 0
												}
												fe := fe0
												fe.SampleRateHz, fe.WindowSamples, fe.FFTSize, fe.HopSamples, fe.Bands = rate, win, win, hop, bands
												fe.FMaxHz = fmax
												if fmax == 0 {
													fe.FMaxHz = float64(rate) / 2
												}
												j := &Job{Format: JobFormat, Data: data, Group: in.Group, Classes: in.Classes, Folds: in.Folds,
													FrontEnd: fe, Overlap: ov, Arch: arch, Knobs: nn.ArchKnobs{Width: width, Blocks: blocks},
													Method: method, Scheme: scheme, Train: g.Settings, Profile: in.Profile}
												j.Label = jobLabel(j)
												if seen[j.Label] {
													continue
												}
												seen[j.Label] = true
												p.GridPoints++
												if reason := j.price(); reason != "" {
													p.Pruned = append(p.Pruned, Pruned{Label: j.Label, Reason: []string{"invalid: " + reason}})
													p.PrunedBy["invalid"]++
													continue
												}
												if !j.Cost.Fits {
													var over []string
													for _, r := range []struct {
														name string
														fits bool
													}{{"compute", j.Cost.ComputeFits}, {"ram", j.Cost.RAMFits}, {"flash", j.Cost.FlashFits}} {
														if !r.fits {
															over = append(over, r.name)
															if !in.KeepUnfit {
																p.PrunedBy[r.name]++
															}
														}
													}
													if !in.KeepUnfit {
														c := j.Cost
														p.Pruned = append(p.Pruned, Pruned{Label: j.Label, Reason: over, Cost: &c})
														continue
													}
													j.Unfit = true
												}
												j.Index = len(p.Jobs)
												p.Jobs = append(p.Jobs, j)
												p.JobLabels = append(p.JobLabels, j.Label)
											}
										}
									}
								}
							}
						}
					}
				}
			}
		}
	}
	return p, nil
}

// jobLabel is a short readable name of a grid point, unique per point.
func jobLabel(j *Job) string {
	fe := j.FrontEnd
	net := fmt.Sprintf("%s×%g", j.Arch, j.Knobs.Width)
	if j.Knobs.Blocks > 0 {
		net += fmt.Sprintf("/%db", j.Knobs.Blocks)
	}
	return fmt.Sprintf("%gk w%d h%d m%d f%g %s ov%g %s %s", float64(fe.SampleRateHz)/1000, fe.WindowSamples, fe.HopSamples, fe.Bands, fe.FMaxHz, net, j.Overlap, j.Method, j.Scheme)
}

// price fills the input shape, network spec and cost of j, or returns why
// the point is invalid.
func (j *Job) price() string {
	fe := j.FrontEnd
	if err := fe.Validate(); err != nil {
		return err.Error()
	}
	frames := fe.Frames(int(math.Round(j.Train.WindowSeconds * float64(fe.SampleRateHz))))
	if frames < 1 {
		return fmt.Sprintf("a %g s window is shorter than one %d-sample frame", j.Train.WindowSeconds, fe.WindowSamples)
	}
	spec, err := nn.ArchSpecFor(j.Arch, len(j.Classes), nn.Shape{H: fe.Bands, W: frames, C: 1}, j.Knobs)
	if err != nil {
		return err.Error()
	}
	net, err := nn.FromSpec(spec, nn.Shape{}, 1)
	if err != nil {
		return err.Error()
	}
	defer net.Close()
	fc, err := features.CostOnDevice(fe, frames)
	if err != nil {
		return err.Error()
	}
	ips, err := nn.InferencesPerSecond(j.Train.WindowSeconds, j.Overlap)
	if err != nil {
		return err.Error()
	}
	j.NetSpec, j.InputFrames, j.InferencesSec = spec, frames, ips
	j.Cost = WholePathCost(nn.Cost(net, 1), ips, fc, j.Profile)
	return ""
}

// Paths of a sweep directory.
func planPath(dir string) string { return filepath.Join(dir, "plan.json") }

// JobPath is the spec file of job i in dir.
func JobPath(dir string, i int) string {
	return filepath.Join(dir, "jobs", fmt.Sprintf("job-%04d.json", i))
}

// ResultPath is the result file of job i in dir, next to its spec.
func ResultPath(dir string, i int) string {
	return filepath.Join(dir, "jobs", fmt.Sprintf("job-%04d.result.json", i))
}

// WorkDir is the directory of job i's models and training logs.
func WorkDir(dir string, i int) string {
	return filepath.Join(dir, "jobs", fmt.Sprintf("job-%04d.work", i))
}

// Write writes the plan and its job specs into dir, which must not hold
// another plan already (a plan is never overwritten: results next to its
// specs would no longer match).
func (p *Plan) Write(dir string) error {
	if _, err := os.Stat(planPath(dir)); err == nil {
		return fmt.Errorf("%s already holds a plan (plan.json); choose another --out or remove it", dir)
	}
	if err := os.MkdirAll(filepath.Join(dir, "jobs"), 0o755); err != nil {
		return err
	}
	for _, j := range p.Jobs {
		b, err := json.MarshalIndent(j, "", "  ")
		if err != nil {
			return err
		}
		if err := fsutil.WriteFile(JobPath(dir, j.Index), append(b, '\n')); err != nil {
			return err
		}
	}
	b, err := json.MarshalIndent(p, "", "  ")
	if err != nil {
		return err
	}
	// The plan last: a directory with plan.json has all its jobs.
	return fsutil.WriteFile(planPath(dir), append(b, '\n'))
}

// ReadPlan reads dir's plan.json and its job specs.
func ReadPlan(dir string) (*Plan, error) {
	b, err := os.ReadFile(planPath(dir))
	if err != nil {
		if os.IsNotExist(err) {
			return nil, fmt.Errorf("%s: no plan.json (run pipit sweep plan first)", dir)
		}
		return nil, err
	}
	p := &Plan{}
	if err := json.Unmarshal(b, p); err != nil {
		return nil, fmt.Errorf("%s: %w", planPath(dir), err)
	}
	if p.Format != PlanFormat {
		return nil, fmt.Errorf("%s: format %q, want %q", planPath(dir), p.Format, PlanFormat)
	}
	for i := range p.JobLabels {
		j, _, err := ReadJob(dir, i)
		if err != nil {
			return nil, err
		}
		p.Jobs = append(p.Jobs, j)
	}
	return p, nil
}

// ReadJob reads job i's spec and returns it with the SHA-256 of its bytes.
func ReadJob(dir string, i int) (*Job, string, error) {
	path := JobPath(dir, i)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, "", err
	}
	j := &Job{}
	if err := json.Unmarshal(b, j); err != nil {
		return nil, "", fmt.Errorf("%s: %w", path, err)
	}
	if j.Format != JobFormat || j.Index != i {
		return nil, "", fmt.Errorf("%s: not job %d of format %q", path, i, JobFormat)
	}
	sum := sha256.Sum256(b)
	return j, hex.EncodeToString(sum[:]), nil
}

// Summary returns the plan's one-paragraph account: points, jobs, pruned
// by resource.
func (p *Plan) Summary() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%d grid points → %d jobs; %d pruned before training", p.GridPoints, len(p.Jobs), len(p.Pruned))
	if len(p.PrunedBy) > 0 {
		var parts []string
		for _, k := range sortedKeys(p.PrunedBy) {
			parts = append(parts, fmt.Sprintf("%d over %s", p.PrunedBy[k], k))
		}
		if n := p.PrunedBy["invalid"]; n > 0 {
			parts = parts[:0]
			for _, k := range sortedKeys(p.PrunedBy) {
				if k == "invalid" {
					parts = append(parts, fmt.Sprintf("%d invalid", n))
				} else {
					parts = append(parts, fmt.Sprintf("%d over %s", p.PrunedBy[k], k))
				}
			}
		}
		fmt.Fprintf(&b, " (%s; a point can be over several resources)", strings.Join(parts, ", "))
	}
	fmt.Fprintf(&b, " against %s", p.Profile.Name)
	return b.String()
}

package main

import (
	"context"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"strings"
	"syscall"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/internal/fsutil"
	"github.com/pipit-audio/pipit/internal/plots"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/sweep"
)

func newSweepCmd() *cobra.Command {
	cmd := &cobra.Command{
		Use:   "sweep",
		Short: "Search front-end and network settings for the most accurate int8 model that fits the device",
		Long: `sweep answers "which front end and network give the best int8 accuracy
that still fits this device". "sweep plan" expands a grid file into one
self-contained job spec per point, pruning before any training every point
whose whole-path cost (C front end + int8 network) exceeds the profile;
"sweep run" trains, calibrates and evaluates jobs with cross-validation,
one, several at a time, or one per array task of a batch scheduler;
"sweep report" merges the results into a table with the Pareto front of
int8 accuracy against compute and a figure. The grid file format is
described in the README and in the documentation of package sweep.`,
	}
	cmd.AddCommand(newSweepPlanCmd(), newSweepRunCmd(), newSweepReportCmd())
	return cmd
}

func newSweepPlanCmd() *cobra.Command {
	var data, profile, grid, out, group string
	var keepUnfit bool
	cmd := &cobra.Command{
		Use:   "plan --data MANIFEST --profile P --grid FILE --out DIR",
		Short: "Expand a grid file into job specs, pruning points that cannot fit",
		Args:  cobra.NoArgs,
	}
	f := cmd.Flags()
	f.StringVar(&data, "data", "", "manifest CSV or folder with one sub-folder per class (required)")
	f.StringVar(&profile, "profile", "m4-half", "device profile: "+strings.Join(nn.ProfileNames(), ", "))
	f.StringVar(&grid, "grid", "", "grid file (required)")
	f.StringVar(&out, "out", "", "sweep directory to create (required)")
	f.StringVar(&group, "group", "", "manifest column naming the source recording (clips of one source share a fold)")
	f.BoolVar(&keepUnfit, "train-unfit", false, "keep points over the profile as jobs too (marked unfit; for comparison)")
	for _, r := range []string{"data", "grid", "out"} {
		cmd.MarkFlagRequired(r)
	}
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		p, err := nn.LookupProfile(profile)
		if err != nil {
			return err
		}
		g, err := sweep.ParseGridFile(grid)
		if err != nil {
			return err
		}
		c, err := datasets.Open(data, group)
		if err != nil {
			return err
		}
		if !c.HasFolds {
			if err := c.AssignFolds(g.Settings.Folds, g.Settings.Seed); err != nil {
				return fmt.Errorf("%s: %w", data, err)
			}
		}
		plan, err := sweep.Expand(g, sweep.PlanInput{Data: data, Group: group, Classes: c.Classes, Folds: c.Folds, Profile: p, KeepUnfit: keepUnfit})
		if err != nil {
			return err
		}
		if len(plan.Jobs) == 0 {
			return fmt.Errorf("%s: %s — nothing to train", grid, plan.Summary())
		}
		if err := plan.Write(out); err != nil {
			return err
		}
		w := cmd.OutOrStdout()
		fmt.Fprintln(w, plan.Summary())
		for _, pr := range plan.Pruned {
			fmt.Fprintf(w, "  pruned %s: %s\n", pr.Label, strings.Join(pr.Reason, ", "))
		}
		fmt.Fprintf(w, "wrote %s (jobs 0..%d in %s)\n", filepath.Join(out, "plan.json"), len(plan.Jobs)-1, filepath.Join(out, "jobs"))
		return nil
	}
	return cmd
}

func newSweepRunCmd() *cobra.Command {
	var job, parallel, halving int
	var fromEnv, cacheDir string
	var verbose bool
	cmd := &cobra.Command{
		Use:   "run DIR [--job N | --index-from-env VAR] [--parallel K]",
		Short: "Run the jobs of a sweep that have no result yet",
		Long: `run trains every job of the sweep in DIR that has no valid result: per
fold, training with early stopping on the next fold, int8 calibration on
that validation fold, float and int8 evaluation on the test fold. Each
result is written atomically next to its spec; finished jobs are skipped,
half-written or stale results redone, so a killed run re-run finishes only
what is missing. --job N runs job N alone; --index-from-env VAR takes N
from an array-job variable (JOB_COMPLETION_INDEX under Kubernetes Indexed
Jobs, SLURM_ARRAY_TASK_ID under Slurm job arrays).`,
		Args: cobra.ExactArgs(1),
	}
	f := cmd.Flags()
	f.IntVar(&job, "job", -1, "run this job only")
	f.StringVar(&fromEnv, "index-from-env", "", "run the job whose index this environment variable holds")
	f.IntVar(&parallel, "parallel", 1, "jobs to run at a time")
	f.IntVar(&halving, "halving", 0, "successive halving with this η ≥ 2: every job for epochs/η, then the best 1/η for the full epochs (0: full grid)")
	f.StringVar(&cacheDir, "cache", defaultCacheDir(), "feature cache directory (empty: no cache)")
	f.BoolVar(&verbose, "verbose", false, "show per-epoch training progress")
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		dir := args[0]
		o := sweep.RunOptions{Parallel: parallel, Halving: halving, Log: cmd.ErrOrStderr()}
		if job >= 0 && fromEnv != "" {
			return fmt.Errorf("give --job or --index-from-env, not both")
		}
		if fromEnv != "" {
			i, err := sweep.IndexFromEnv(fromEnv)
			if err != nil {
				return err
			}
			job = i
		}
		if job >= 0 {
			o.Jobs = []int{job}
		}
		if halving == 1 || halving < 0 {
			return fmt.Errorf("--halving %d: want 0 (full grid) or η ≥ 2", halving)
		}
		chatter := io.Discard
		if verbose {
			chatter = cmd.ErrOrStderr()
		}
		o.Train = sweepTrainer(cacheDir, chatter)
		ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
		defer stop()
		s, err := sweep.Run(ctx, dir, o)
		if s != nil {
			fmt.Fprintf(cmd.OutOrStdout(), "%d jobs: %d ran, %d already done, %d redone, %d failed\n", s.Jobs, s.Ran, s.Skipped, len(s.Redone), len(s.Failed))
			if halving >= 2 && s.FullEpochBudget > 0 {
				fmt.Fprintf(cmd.OutOrStdout(), "successive halving: %d of %d fold-epochs budgeted (saving %.0f %%); continued jobs %v\n",
					s.EpochBudget, s.FullEpochBudget, 100*(1-float64(s.EpochBudget)/float64(s.FullEpochBudget)), s.Promoted)
			}
		}
		return err
	}
	return cmd
}

// sweepTrainer trains one fold of a job with the library's train and
// quantize pipeline (pipit.Train, pipit.Quantize).
func sweepTrainer(cacheDir string, chatter io.Writer) sweep.TrainFunc {
	_ = chatter // the library reports through a Reporter; the sweep runs quietly
	return func(ctx context.Context, j *sweep.Job, fold, epochs int, work string, _ io.Writer) (*sweep.FoldResult, error) {
		t := j.Train
		c, err := pipit.OpenCorpus(pipit.Data{Path: j.Data, Group: j.Group, CacheDir: cacheDir}, t.Folds, t.Seed)
		if err != nil {
			return nil, err
		}
		if c.Folds != j.Folds {
			return nil, fmt.Errorf("%s has %d folds now, the plan %d", j.Data, c.Folds, j.Folds)
		}
		if err := os.MkdirAll(work, 0o755); err != nil {
			return nil, err
		}
		arch := j.Arch
		if j.NetSpec != "" {
			arch = filepath.Join(work, "net.spec")
			if err := fsutil.WriteFile(arch, []byte(j.NetSpec)); err != nil {
				return nil, err
			}
		}
		r := pipit.DefaultRecipe()
		r.Epochs, r.Batch, r.Patience, r.Seed, r.LR, r.NoAugment = epochs, t.Batch, t.Patience, t.Seed, t.LR, !t.Augment
		model := filepath.Join(work, fmt.Sprintf("fold%d.pnet", fold))
		tr, err := pipit.Train(c, pipit.TrainConfig{Arch: arch, FrontEnd: j.FrontEnd, Overlap: t.TrainOverlap, Pad: datasets.PadZeros,
			TestFold: c.FoldLabel(fold), Recipe: r, CacheDir: cacheDir, Out: model, Replace: true, CarryOn: true}, nil)
		if err != nil {
			return nil, err
		}
		m, err := pipit.LoadModel(model)
		if err != nil {
			return nil, err
		}
		defer m.Close()
		fm, ok := m.(*pipit.FloatModel)
		if !ok {
			return nil, fmt.Errorf("%s: not a float model", model)
		}
		qc := j.QuantConfig()
		q, err := pipit.Quantize(fm, pipit.QuantizeConfig{Data: pipit.Data{Path: j.Data, Group: j.Group, CacheDir: cacheDir}, Method: qc.Method, Scheme: qc.Scheme,
			Out: filepath.Join(work, fmt.Sprintf("fold%d.pq8", fold))}, nil)
		if err != nil {
			return nil, err
		}
		return &sweep.FoldResult{FloatAccuracy: q.FloatAccuracy, Int8Accuracy: q.Int8Accuracy, FloatClipAccuracy: q.FloatClipAcc, Int8ClipAccuracy: q.Int8ClipAcc,
			Method: q.Method, Epochs: tr.Epochs, BestEpoch: tr.BestEpoch, Seconds: tr.Seconds}, nil
	}
}

func newSweepReportCmd() *cobra.Command {
	var asJSON bool
	var png string
	cmd := &cobra.Command{
		Use:   "report DIR [--json]",
		Short: "Merge a sweep's results into a table with the Pareto front and a figure",
		Long: `report merges the results in DIR (rows by job index, no timings, so the
same results give the same bytes whatever order they finished in) into a
table of front-end settings, network, compute, RAM, flash, fit, float and
int8 accuracy (mean ± sd over folds) and the int8 gap, marks the Pareto
front of int8 accuracy against whole-path compute among the models that
fit, and draws it (--png, default DIR/front.png).`,
		Args: cobra.ExactArgs(1),
	}
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the report as JSON")
	cmd.Flags().StringVar(&png, "png", "", "figure of int8 accuracy against compute (default DIR/front.png; \"-\": none)")
	cmd.RunE = func(cmd *cobra.Command, args []string) error {
		rep, err := sweep.Merge(args[0])
		if err != nil {
			return err
		}
		if png == "" {
			png = filepath.Join(args[0], "front.png")
		}
		if png != "-" && len(rep.Rows) > len(rep.Missing) {
			if err := plots.SavePNG(png, rep.Figure()); err != nil {
				return err
			}
		}
		if asJSON {
			return rep.WriteJSON(cmd.OutOrStdout())
		}
		return rep.WriteTable(cmd.OutOrStdout())
	}
	return cmd
}

package sweep

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"sort"
	"strconv"
	"sync"
	"time"

	"github.com/pipit-audio/pipit/internal/fsutil"
)

// FoldResult is what training, calibrating and evaluating one fold gave.
type FoldResult struct {
	TestFold          int     `json:"test_fold"`
	FloatAccuracy     float64 `json:"float_accuracy"` // test-fold windows
	Int8Accuracy      float64 `json:"int8_accuracy"`
	FloatClipAccuracy float64 `json:"float_clip_accuracy"`
	Int8ClipAccuracy  float64 `json:"int8_clip_accuracy"`
	Method            string  `json:"method"` // calibration method used (auto resolves to one)
	Epochs            int     `json:"epochs"` // epochs trained
	BestEpoch         int     `json:"best_epoch"`
	Seconds           float64 `json:"seconds"`
}

// TrainFunc trains job's network with testFold held out for at most
// epochs epochs, calibrates and quantises it to int8 and evaluates both
// on the test fold. workDir is the job's own directory for models and
// logs; log receives progress lines.
type TrainFunc func(ctx context.Context, job *Job, testFold, epochs int, workDir string, log io.Writer) (*FoldResult, error)

// MeanSD is a mean and sample standard deviation (n − 1) over folds.
type MeanSD struct {
	Mean float64 `json:"mean"`
	SD   float64 `json:"sd"`
}

func meanSD(v []float64) MeanSD {
	var m MeanSD
	for _, x := range v {
		m.Mean += x
	}
	m.Mean /= float64(len(v))
	if len(v) > 1 {
		var s float64
		for _, x := range v {
			s += (x - m.Mean) * (x - m.Mean)
		}
		m.SD = math.Sqrt(s / float64(len(v)-1))
	}
	return m
}

// Result is a finished job, written atomically as
// DIR/jobs/job-NNNN.result.json next to its spec.
type Result struct {
	Format     string       `json:"format"`
	Index      int          `json:"index"`
	SpecSHA256 string       `json:"spec_sha256"` // of the job file it answers
	Epochs     int          `json:"epochs"`      // epoch budget per fold
	Folds      []FoldResult `json:"folds"`
	Float      MeanSD       `json:"float_accuracy"`
	Int8       MeanSD       `json:"int8_accuracy"`
	Gap        float64      `json:"int8_gap"` // float mean − int8 mean
	// Halving: the first rung's result of a job not promoted is its
	// final result, with Promoted false and Epochs the rung's budget.
	Rung     int  `json:"rung"`
	Promoted bool `json:"promoted,omitempty"`
	Halving  int  `json:"halving,omitempty"` // η of successive halving, 0: full grid
}

func newResult(j *Job, sum string, epochs int, folds []FoldResult) *Result {
	r := &Result{Format: ResultFormat, Index: j.Index, SpecSHA256: sum, Epochs: epochs, Folds: folds}
	var f, q []float64
	for _, x := range folds {
		f, q = append(f, x.FloatAccuracy), append(q, x.Int8Accuracy)
	}
	r.Float, r.Int8 = meanSD(f), meanSD(q)
	r.Gap = r.Float.Mean - r.Int8.Mean
	return r
}

// readResult returns the result at path if it is complete and answers the
// spec with digest sum; a missing, half-written, unreadable or stale file
// gives nil and the reason.
func readResult(path string, j *Job, sum string) (*Result, string) {
	b, err := os.ReadFile(path)
	if err != nil {
		if os.IsNotExist(err) {
			return nil, ""
		}
		return nil, err.Error()
	}
	r := &Result{}
	if err := json.Unmarshal(b, r); err != nil {
		return nil, fmt.Sprintf("unreadable (%v)", err)
	}
	switch {
	case r.Format != ResultFormat:
		return nil, fmt.Sprintf("format %q", r.Format)
	case r.Index != j.Index:
		return nil, fmt.Sprintf("answers job %d", r.Index)
	case r.SpecSHA256 != sum:
		return nil, "written for another version of the spec"
	case len(r.Folds) != j.Folds:
		return nil, fmt.Sprintf("%d of %d folds", len(r.Folds), j.Folds)
	}
	return r, ""
}

// RunOptions configure [Run].
type RunOptions struct {
	Train    TrainFunc
	Jobs     []int // job indices to run; nil: all
	Parallel int   // jobs at a time; < 1 means 1
	// Halving, when ≥ 2, runs successive halving: every job first for
	// Epochs/Halving epochs (at least 1), then only the best 1/Halving of
	// them (by mean int8 accuracy) for the full epochs. Needs every job of
	// the plan (no Jobs subset).
	Halving int
	Log     io.Writer // progress lines; nil: discarded
}

// RunSummary says what [Run] did.
type RunSummary struct {
	Jobs, Skipped, Ran int
	Redone             []string // results ignored as half-written or stale, with the reason
	Failed             []string
	// Fold-epochs budgeted and what the full grid would have budgeted
	// (successive halving reports its saving with these).
	EpochBudget, FullEpochBudget int
	Promoted                     []int
}

// Run runs the jobs of the sweep in dir that have no valid result yet,
// o.Parallel at a time, and writes each result atomically next to its
// spec. A finished job is skipped; a half-written or stale result is
// ignored and redone. When ctx is cancelled no new job starts and a
// running job stops between folds without writing a result.
func Run(ctx context.Context, dir string, o RunOptions) (*RunSummary, error) {
	if o.Train == nil {
		return nil, errors.New("sweep: RunOptions.Train is nil")
	}
	p, err := ReadPlan(dir)
	if err != nil {
		return nil, err
	}
	log := o.Log
	if log == nil {
		log = io.Discard
	}
	lw := &lockedWriter{w: log}
	idx := o.Jobs
	if idx == nil {
		for i := range p.Jobs {
			idx = append(idx, i)
		}
	}
	for _, i := range idx {
		if i < 0 || i >= len(p.Jobs) {
			return nil, fmt.Errorf("%s: job %d: the plan has jobs 0..%d", dir, i, len(p.Jobs)-1)
		}
	}
	s := &RunSummary{Jobs: len(idx)}
	if o.Halving >= 2 {
		if o.Jobs != nil {
			return nil, errors.New("sweep: successive halving ranks every job of the plan; run it without a job subset")
		}
		return s, runHalving(ctx, dir, p, o, lw, s)
	}
	for _, i := range idx {
		s.FullEpochBudget += p.Jobs[i].Folds * p.Jobs[i].Train.Epochs
	}
	s.EpochBudget = s.FullEpochBudget
	return s, runRung(ctx, dir, p, idx, o, lw, s, 0, func(j *Job) int { return j.Train.Epochs }, ResultPath)
}

// runRung runs the jobs idx with epochs(job) epochs per fold, writing
// results to path(dir, i).
func runRung(ctx context.Context, dir string, p *Plan, idx []int, o RunOptions, log io.Writer, s *RunSummary, rung int,
	epochs func(*Job) int, path func(string, int) string) error {
	type task struct {
		job *Job
		sum string
	}
	var todo []task
	for _, i := range idx {
		j, sum, err := ReadJob(dir, i)
		if err != nil {
			return err
		}
		r, why := readResult(path(dir, i), j, sum)
		if r != nil && r.Epochs != epochs(j) {
			r, why = nil, fmt.Sprintf("trained for %d epochs, this run wants %d", r.Epochs, epochs(j))
		}
		if r != nil {
			s.Skipped++
			continue
		}
		if why != "" {
			s.Redone = append(s.Redone, fmt.Sprintf("job %d: %s", i, why))
			fmt.Fprintf(log, "job %d: ignoring its result file (%s); running it again\n", i, why)
		}
		todo = append(todo, task{j, sum})
	}
	par := max(o.Parallel, 1)
	ch := make(chan task)
	var wg sync.WaitGroup
	var mu sync.Mutex
	for w := 0; w < par; w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for t := range ch {
				err := runJob(ctx, dir, t.job, t.sum, epochs(t.job), rung, o, log, path)
				mu.Lock()
				if err != nil {
					s.Failed = append(s.Failed, fmt.Sprintf("job %d: %v", t.job.Index, err))
				} else {
					s.Ran++
				}
				mu.Unlock()
			}
		}()
	}
	for _, t := range todo {
		if ctx.Err() != nil {
			break
		}
		ch <- t
	}
	close(ch)
	wg.Wait()
	if ctx.Err() != nil {
		return ctx.Err()
	}
	if len(s.Failed) > 0 {
		sort.Strings(s.Failed)
		return fmt.Errorf("sweep: %d jobs failed:\n  %s", len(s.Failed), joinLines(s.Failed))
	}
	return nil
}

func joinLines(s []string) string {
	out := ""
	for i, x := range s {
		if i > 0 {
			out += "\n  "
		}
		out += x
	}
	return out
}

func runJob(ctx context.Context, dir string, j *Job, sum string, epochs, rung int, o RunOptions, log io.Writer, path func(string, int) string) error {
	t0 := time.Now()
	fmt.Fprintf(log, "job %d (%s): %d folds, %d epochs each\n", j.Index, j.Label, j.Folds, epochs)
	work := WorkDir(dir, j.Index)
	if rung == 0 && o.Halving >= 2 {
		work += ".rung0"
	}
	if err := os.MkdirAll(work, 0o755); err != nil {
		return err
	}
	var folds []FoldResult
	for k := 0; k < j.Folds; k++ {
		if err := ctx.Err(); err != nil {
			return err
		}
		fr, err := o.Train(ctx, j, k, epochs, work, log)
		if err != nil {
			return fmt.Errorf("fold %d: %w", k, err)
		}
		fr.TestFold = k
		folds = append(folds, *fr)
	}
	r := newResult(j, sum, epochs, folds)
	r.Rung, r.Halving, r.Promoted = rung, o.Halving, rung == 1
	if err := writeResult(path(dir, j.Index), r); err != nil {
		return err
	}
	fmt.Fprintf(log, "job %d done in %.0f s: float %.3f ± %.3f, int8 %.3f ± %.3f\n", j.Index, time.Since(t0).Seconds(), r.Float.Mean, r.Float.SD, r.Int8.Mean, r.Int8.SD)
	return nil
}

func writeResult(path string, r *Result) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	return fsutil.WriteFile(path, append(b, '\n'))
}

// IndexFromEnv reads a job index from the environment variable name, as
// set by a batch scheduler for array jobs (JOB_COMPLETION_INDEX for
// Kubernetes Indexed Jobs, SLURM_ARRAY_TASK_ID for Slurm job arrays).
func IndexFromEnv(name string) (int, error) {
	v, ok := os.LookupEnv(name)
	if !ok || v == "" {
		return 0, fmt.Errorf("environment variable %s is not set (it carries the job index under an array job)", name)
	}
	i, err := strconv.Atoi(v)
	if err != nil || i < 0 {
		return 0, fmt.Errorf("environment variable %s=%q is not a job index (a whole number ≥ 0)", name, v)
	}
	return i, nil
}

type lockedWriter struct {
	mu sync.Mutex
	w  io.Writer
}

func (l *lockedWriter) Write(b []byte) (int, error) {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.w.Write(b)
}

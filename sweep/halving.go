package sweep

import (
	"context"
	"fmt"
	"io"
	"path/filepath"
	"sort"
)

// rungPath is where job i's first-rung result goes under halving.
func rungPath(dir string, i int) string {
	return filepath.Join(dir, "jobs", fmt.Sprintf("job-%04d.rung0.json", i))
}

// RungEpochs is the first rung's epoch budget under halving with η = eta.
func RungEpochs(full, eta int) int { return max(1, full/eta) }

// runHalving runs successive halving with two rungs: every job for
// RungEpochs epochs, then the best ⌈n/η⌉ by mean int8 accuracy (ties: the
// lower whole-path compute, then the lower index) trained again for the
// full epochs. Promoted jobs are retrained from their initial weights
// (the cosine schedule is laid out over the whole run), so the saving is
// the rung budget of the jobs that stop early.
func runHalving(ctx context.Context, dir string, p *Plan, o RunOptions, log io.Writer, s *RunSummary) error {
	var all []int
	for i, j := range p.Jobs {
		all = append(all, i)
		s.FullEpochBudget += j.Folds * j.Train.Epochs
	}
	eta := o.Halving
	if err := runRung(ctx, dir, p, all, o, log, s, 0, func(j *Job) int { return RungEpochs(j.Train.Epochs, eta) }, rungPath); err != nil {
		return err
	}
	type scored struct {
		i   int
		acc float64
		c   float64
	}
	var sc []scored
	first := map[int]*Result{}
	for _, i := range all {
		j, sum, err := ReadJob(dir, i)
		if err != nil {
			return err
		}
		r, why := readResult(rungPath(dir, i), j, sum)
		if r == nil {
			return fmt.Errorf("job %d: no first-rung result (%s)", i, why)
		}
		first[i] = r
		sc = append(sc, scored{i, r.Int8.Mean, j.Cost.ComputePerSecond})
		s.EpochBudget += j.Folds * RungEpochs(j.Train.Epochs, eta)
	}
	sort.Slice(sc, func(a, b int) bool {
		if sc[a].acc != sc[b].acc {
			return sc[a].acc > sc[b].acc
		}
		if sc[a].c != sc[b].c {
			return sc[a].c < sc[b].c
		}
		return sc[a].i < sc[b].i
	})
	keep := (len(sc) + eta - 1) / eta
	promoted := map[int]bool{}
	var up []int
	for _, x := range sc[:keep] {
		promoted[x.i] = true
		up = append(up, x.i)
	}
	sort.Ints(up)
	s.Promoted = up
	fmt.Fprintf(log, "halving: %d of %d jobs continue to %d epochs: %v\n", len(up), len(all), p.Jobs[0].Train.Epochs, up)
	// Jobs that stop: their first-rung result is final.
	for _, i := range all {
		if promoted[i] {
			s.EpochBudget += p.Jobs[i].Folds * p.Jobs[i].Train.Epochs
			continue
		}
		j, sum, _ := ReadJob(dir, i)
		if r, _ := readResult(ResultPath(dir, i), j, sum); r != nil {
			continue
		}
		r := *first[i]
		r.Promoted = false
		if err := writeResult(ResultPath(dir, i), &r); err != nil {
			return err
		}
	}
	sub := *s
	err := runRung(ctx, dir, p, up, o, log, &sub, 1, func(j *Job) int { return j.Train.Epochs }, func(d string, i int) string { return ResultPath(d, i) })
	s.Ran, s.Skipped, s.Redone, s.Failed = sub.Ran, sub.Skipped, sub.Redone, sub.Failed
	return err
}

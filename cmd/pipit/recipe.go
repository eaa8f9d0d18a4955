package main

import (
	"bytes"
	"encoding/json"
	"fmt"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
)

// recipeOptions are the training-recipe flags of pipit train.
type recipeOptions struct {
	mixup, smoothing, weightDecay float64
	schedule                      string
	balanced                      bool
	teacher                       string
	distill                       nn.Distill
}

func addRecipeFlags(cmd *cobra.Command, r *recipeOptions) {
	f := cmd.Flags()
	f.Float64Var(&r.mixup, "mixup", 0, "mix each batch of log-mel windows and their labels with λ ~ Beta(α, α), this α (0: off)")
	f.Float64Var(&r.smoothing, "label-smoothing", 0, "label smoothing ε in [0, 1)")
	f.Float64Var(&r.weightDecay, "weight-decay", 1e-4, "decoupled weight decay of AdamW")
	f.StringVar(&r.schedule, "schedule", nn.SchedCosine, "learning-rate schedule after the warm-up: cosine or constant")
	f.BoolVar(&r.balanced, "balanced", false, "draw every class equally often in each epoch (for skewed corpora)")
	f.StringVar(&r.teacher, "teacher", "", "float model to distil from (with --cross-validate: the teacher's MODEL, fold K read from MODEL.foldK)")
	f.Float64Var(&r.distill.Temperature, "distill-temperature", 4, "distillation temperature T")
	f.Float64Var(&r.distill.Weight, "distill-weight", 0.5, "weight of the distillation term, in [0, 1]")
}

// schedule returns the learning-rate schedule of a run of steps.
func (r *recipeOptions) sched(lr float64, steps int64) (nn.Schedule, error) {
	s := nn.Schedule{Kind: r.schedule, Base: lr, WarmupSteps: min(steps/10, 100), TotalSteps: steps, Final: 0.02}
	if r.schedule != nn.SchedCosine && r.schedule != nn.SchedConstant {
		return s, fmt.Errorf("--schedule %q: want cosine or constant", r.schedule)
	}
	return s, nil
}

// fitRecipe builds the nn.Recipe of a run; teacherPath is the teacher for
// this fold ("" for none). The teacher must have been trained with the
// same test and validation folds, front end, window, band statistics and
// classes, so that it sees the same inputs and nothing of the test fold.
// The returned close releases the teacher.
func (r *recipeOptions) fitRecipe(teacherPath string, info *datasets.ModelInfo) (*nn.Recipe, func(), error) {
	rec := &nn.Recipe{MixupAlpha: r.mixup, Balanced: r.balanced, Distill: r.distill}
	if teacherPath == "" {
		return rec, func() {}, nil
	}
	m, err := loadModel(teacherPath)
	if err != nil {
		return nil, nil, err
	}
	if m.net == nil {
		return nil, nil, fmt.Errorf("--teacher %s: an int8 model cannot teach; give the float model", teacherPath)
	}
	t := m.info
	same := func(a, b any) bool {
		x, _ := json.Marshal(a)
		y, _ := json.Marshal(b)
		return bytes.Equal(x, y)
	}
	switch {
	case t.TestFold != info.TestFold || t.ValFold != info.ValFold || t.Folds != info.Folds:
		err = fmt.Errorf("test fold %d, validation fold %d of %d; this run has %d, %d of %d", t.TestFold, t.ValFold, t.Folds, info.TestFold, info.ValFold, info.Folds)
	case !same(t.Classes, info.Classes):
		err = fmt.Errorf("classes %v; this run has %v", t.Classes, info.Classes)
	case !same(t.FrontEnd, info.FrontEnd) || !same(t.Window, info.Window):
		err = fmt.Errorf("another front end or window")
	case !same(t.Stats, info.Stats):
		err = fmt.Errorf("other band statistics (trained on other clips)")
	}
	if err != nil {
		m.close()
		return nil, nil, fmt.Errorf("--teacher %s: %w", teacherPath, err)
	}
	rec.Teacher = m.net
	return rec, m.close, nil
}

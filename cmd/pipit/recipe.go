package main

import (
	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit"
)

// addRecipeFlags adds the training-recipe flags of pipit train.
func addRecipeFlags(cmd *cobra.Command, r *pipit.Recipe) {
	f := cmd.Flags()
	f.Float64Var(&r.MixupAlpha, "mixup", r.MixupAlpha, "mix each batch of log-mel windows and their labels with λ ~ Beta(α, α), this α (0: off)")
	f.Float64Var(&r.LabelSmoothing, "label-smoothing", r.LabelSmoothing, "label smoothing ε in [0, 1)")
	f.Float64Var(&r.WeightDecay, "weight-decay", r.WeightDecay, "decoupled weight decay of AdamW")
	f.StringVar(&r.Schedule, "schedule", r.Schedule, "learning-rate schedule after the warm-up: constant or cosine (see the README's recipe ablation)")
	f.BoolVar(&r.Balanced, "balanced", false, "draw every class equally often in each epoch (for skewed corpora)")
	f.StringVar(&r.Teacher, "teacher", "", "float model to distil from (with --cross-validate: the teacher's MODEL, fold K read from MODEL.foldK)")
	f.Float64Var(&r.Distill.Temperature, "distill-temperature", r.Distill.Temperature, "distillation temperature T")
	f.Float64Var(&r.Distill.Weight, "distill-weight", r.Distill.Weight, "weight of the distillation term, in [0, 1]")
}

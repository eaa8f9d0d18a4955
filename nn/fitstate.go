package nn

import (
	"encoding/binary"
	"fmt"
	"math"
	"math/rand/v2"
)

// FitState is everything [Fit] carries from one epoch to the next beyond
// the trainer itself (whose state a checkpoint holds): the epochs done,
// the sample order and the random-number generators of shuffling and of
// the recipe, the best epoch's parameters, the patience counter and the
// history. A run restarted from a trainer checkpoint and the FitState
// saved with it (FitConfig.Resume) continues bit-identically.
type FitState struct {
	EpochsDone int          `json:"epochs_done"`
	Order      []int        `json:"order"`
	ShuffleRNG []byte       `json:"shuffle_rng"`
	RecipeRNG  []byte       `json:"recipe_rng,omitempty"`
	BestParams []byte       `json:"best_params"`    // float32, little-endian
	BestState  []byte       `json:"best_state"`     // float32, little-endian
	BestAcc    uint64       `json:"best_acc_bits"`  // float64 bits (may be −Inf before the first epoch)
	BestLoss   uint64       `json:"best_loss_bits"` // float64 bits
	Since      int          `json:"epochs_since_best"`
	History    []EpochStats `json:"history"`
}

func floatBytes(a []float32) []byte {
	b := make([]byte, 4*len(a))
	for i, v := range a {
		binary.LittleEndian.PutUint32(b[4*i:], math.Float32bits(v))
	}
	return b
}

func bytesToFloats(dst []float32, b []byte, what string) error {
	if len(b) != 4*len(dst) {
		return fmt.Errorf("nn: fit state: %s holds %d bytes, the network needs %d", what, len(b), 4*len(dst))
	}
	for i := range dst {
		dst[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return nil
}

// fitLoop is the part of Fit's state that a FitState saves and restores.
type fitLoop struct {
	epoch             int
	order             []int
	shuffle           *rand.PCG
	recipe            *rand.PCG // nil: no recipe generator
	bestData, bestSt  []float32
	bestAcc, bestLoss float64
	since             int
	hist              []EpochStats
}

func (l *fitLoop) save() (*FitState, error) {
	s := &FitState{EpochsDone: l.epoch, Order: append([]int(nil), l.order...), BestParams: floatBytes(l.bestData), BestState: floatBytes(l.bestSt),
		BestAcc: math.Float64bits(l.bestAcc), BestLoss: math.Float64bits(l.bestLoss), Since: l.since, History: append([]EpochStats(nil), l.hist...)}
	var err error
	if s.ShuffleRNG, err = l.shuffle.MarshalBinary(); err != nil {
		return nil, fmt.Errorf("nn: %w", err)
	}
	if l.recipe != nil {
		if s.RecipeRNG, err = l.recipe.MarshalBinary(); err != nil {
			return nil, fmt.Errorf("nn: %w", err)
		}
	}
	return s, nil
}

func (l *fitLoop) restore(s *FitState, epochs int) error {
	switch {
	case s.EpochsDone < 0 || s.EpochsDone > epochs:
		return fmt.Errorf("nn: fit state: %d epochs done of a run of %d", s.EpochsDone, epochs)
	case len(s.Order) != len(l.order):
		return fmt.Errorf("nn: fit state: order of %d samples, the training set has %d", len(s.Order), len(l.order))
	case len(s.History) != s.EpochsDone:
		return fmt.Errorf("nn: fit state: %d epochs of history for %d epochs done", len(s.History), s.EpochsDone)
	case (l.recipe == nil) != (len(s.RecipeRNG) == 0):
		return fmt.Errorf("nn: fit state: saved with another recipe (mixup or distillation on in one, off in the other)")
	}
	for _, i := range s.Order {
		if i < 0 || i >= len(l.order) {
			return fmt.Errorf("nn: fit state: sample %d in the order, the training set has %d", i, len(l.order))
		}
	}
	if err := l.shuffle.UnmarshalBinary(s.ShuffleRNG); err != nil {
		return fmt.Errorf("nn: fit state: shuffle generator: %w", err)
	}
	if l.recipe != nil {
		if err := l.recipe.UnmarshalBinary(s.RecipeRNG); err != nil {
			return fmt.Errorf("nn: fit state: recipe generator: %w", err)
		}
	}
	if err := bytesToFloats(l.bestData, s.BestParams, "best parameters"); err != nil {
		return err
	}
	if err := bytesToFloats(l.bestSt, s.BestState, "best state"); err != nil {
		return err
	}
	copy(l.order, s.Order)
	l.epoch, l.since = s.EpochsDone, s.Since
	l.bestAcc, l.bestLoss = math.Float64frombits(s.BestAcc), math.Float64frombits(s.BestLoss)
	l.hist = append([]EpochStats(nil), s.History...)
	return nil
}

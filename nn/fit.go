package nn

import (
	"fmt"
	"math"
	"math/rand/v2"
	"time"
)

// SampleSource is a set of labelled samples a network can read, such as
// a datasets.Set.
type SampleSource interface {
	// Len returns the number of samples.
	Len() int
	// Sample writes sample i's input into dst (len = input size) and
	// returns its label; epoch lets augmentation differ between epochs.
	Sample(i, epoch int, dst []float32) int
}

// FitConfig configures [Fit].
type FitConfig struct {
	Epochs   int     // maximum epochs
	Batch    int     // samples per step
	Patience int     // stop after this many epochs without a better validation score; 0 = never
	Seed     uint64  // shuffling
	Recipe   *Recipe // mixup, balanced sampling, distillation; nil: none
	// Resume, if not nil, continues a run from the state saved by Save
	// after some epoch; the trainer must be the one checkpointed with it
	// (same epoch). The rest of the configuration must be the run's.
	Resume *FitState
	// Save, if not nil, runs after every epoch (after onEpoch) with the
	// state that, with a checkpoint of the trainer, resumes the run.
	Save func(*FitState) error
}

// EpochStats reports one epoch of [Fit].
type EpochStats struct {
	Epoch      int     `json:"epoch"`          // 1-based
	Loss       float64 `json:"train_loss"`     // mean over the epoch's samples
	Accuracy   float64 `json:"train_accuracy"` // fraction of training samples right
	ValLoss    float64 `json:"val_fold_loss"`
	ValAcc     float64 `json:"val_fold_accuracy"`
	LR         float64 `json:"learning_rate"`
	Seconds    float64 `json:"seconds"`          // training steps, with their sampling
	ValSeconds float64 `json:"val_fold_seconds"` // the validation pass after them
	SamplesSec float64 `json:"samples_per_second"`
	Best       bool    `json:"best_so_far"` // best validation score so far
}

// FitProgress is called after every training step with the epoch
// (1-based), the step within it, the steps per epoch, the running mean
// loss and accuracy of the epoch, the samples seen and the seconds since
// the epoch began.
type FitProgress func(epoch, step, steps int, loss, acc float64, samples int, seconds float64)

// Fit trains tr on train for up to cfg.Epochs epochs, shuffling with a
// seeded RNG each epoch, evaluates on val after each (skipped when val is
// nil), and keeps the parameters of the epoch with the best validation
// accuracy (ties: lower validation loss); at the end those parameters are
// restored into the network. onEpoch, if not nil, runs after each epoch
// (e.g. to write the best checkpoint and a log); an error from it stops
// training and is returned. Training stops early after cfg.Patience
// epochs without improvement.
func Fit(tr *Trainer, cfg FitConfig, train, val SampleSource, progress FitProgress, onEpoch func(EpochStats) error) ([]EpochStats, error) {
	if cfg.Epochs < 1 || cfg.Batch < 1 {
		return nil, fmt.Errorf("nn: fit needs epochs ≥ 1 and batch ≥ 1, got %d and %d", cfg.Epochs, cfg.Batch)
	}
	n := train.Len()
	if n == 0 {
		return nil, fmt.Errorf("nn: empty training set")
	}
	in := tr.Net.Input.Size()
	var bufs [2]batchBuf
	for k := range bufs {
		bufs[k] = batchBuf{x: make([]float32, cfg.Batch*in), y: make([]int, cfg.Batch)}
	}
	shufflePCG := rand.NewPCG(cfg.Seed, 0x5eed)
	rng := rand.New(shufflePCG)
	order := make([]int, n)
	for i := range order {
		order[i] = i
	}
	var rs *recipeState
	var labels []int
	if cfg.Recipe != nil {
		if err := cfg.Recipe.Check(tr.Net.Input, tr.Loss.Classes); err != nil {
			return nil, err
		}
		if cfg.Recipe.soft() {
			rs = newRecipeState(cfg.Recipe, cfg.Batch, in, tr.Loss.Classes, cfg.Seed)
		}
		if cfg.Recipe.Balanced {
			lb, ok := train.(Labeler)
			if !ok {
				return nil, fmt.Errorf("nn: balanced sampling needs a training set that reports labels")
			}
			labels = make([]int, n)
			for i := range labels {
				labels[i] = lb.Label(i)
			}
		}
	}
	lp := &fitLoop{order: order, shuffle: shufflePCG, bestData: append([]float32(nil), tr.Net.Params.Data...),
		bestSt: append([]float32(nil), tr.Net.Params.State...), bestAcc: math.Inf(-1), bestLoss: math.Inf(1)}
	if rs != nil {
		lp.recipe = rs.pcg
	}
	if cfg.Resume != nil {
		if err := lp.restore(cfg.Resume, cfg.Epochs); err != nil {
			return nil, err
		}
	}
	bestData, bestState := lp.bestData, lp.bestSt
	steps := (n + cfg.Batch - 1) / cfg.Batch
	for ep := lp.epoch + 1; ep <= cfg.Epochs; ep++ {
		if cfg.Patience > 0 && lp.since >= cfg.Patience {
			break // a resumed run that had already stopped early
		}
		t0 := time.Now()
		if labels != nil {
			BalancedOrder(order, labels, rng)
		} else {
			rng.Shuffle(n, func(i, j int) { order[i], order[j] = order[j], order[i] })
		}
		var lossSum float64
		var correct, seen int
		var lr float64
		// the next batch is sampled (augmented, its features computed) on
		// another goroutine while this one trains: the two alternate between
		// two buffers, and every sample is a function of (index, epoch)
		// alone, so the result does not depend on the timing
		ready, free, stop, done := make(chan int, 2), make(chan int, 2), make(chan struct{}), make(chan struct{})
		free <- 0
		free <- 1
		go func() {
			defer close(done)
			prefetch(train, &bufs, order, ep, cfg.Batch, steps, in, ready, free, stop)
		}()
		var stepErr error
		for s := 0; s < steps; s++ {
			k := <-ready
			bb := &bufs[k]
			b := bb.n // read before the buffer goes back to the producer
			var r StepResult
			var err error
			if rs != nil {
				r, err = rs.step(tr, bb.x[:b*in], bb.y[:b])
			} else {
				r, err = tr.Step(bb.x[:b*in], bb.y[:b])
			}
			free <- k
			if err != nil {
				stepErr = fmt.Errorf("nn: epoch %d step %d: %w", ep, s+1, err)
				break
			}
			lossSum += r.Loss * float64(b)
			correct += r.Correct
			seen += b
			lr = r.LR
			if progress != nil {
				progress(ep, s+1, steps, lossSum/float64(seen), float64(correct)/float64(seen), seen, time.Since(t0).Seconds())
			}
		}
		close(stop)
		<-done // ready has room for both buffers, so the producer never blocks there
		if stepErr != nil {
			return lp.hist, stepErr
		}
		st := EpochStats{Epoch: ep, Loss: lossSum / float64(seen), Accuracy: float64(correct) / float64(seen), LR: lr}
		st.Seconds = time.Since(t0).Seconds()
		st.SamplesSec = float64(seen) / st.Seconds
		if val != nil {
			tv := time.Now()
			ev, err := Evaluate(tr.Net, tr.Loss, val, cfg.Batch)
			st.ValSeconds = time.Since(tv).Seconds()
			if err != nil {
				return lp.hist, err
			}
			st.ValLoss, st.ValAcc = ev.Loss, ev.Accuracy
		} else {
			st.ValLoss, st.ValAcc = st.Loss, st.Accuracy
		}
		if st.ValAcc > lp.bestAcc || (st.ValAcc == lp.bestAcc && st.ValLoss < lp.bestLoss) {
			lp.bestAcc, lp.bestLoss = st.ValAcc, st.ValLoss
			copy(bestData, tr.Net.Params.Data)
			copy(bestState, tr.Net.Params.State)
			st.Best = true
			lp.since = 0
		} else {
			lp.since++
		}
		lp.hist = append(lp.hist, st)
		lp.epoch = ep
		if onEpoch != nil {
			if err := onEpoch(st); err != nil {
				return lp.hist, err
			}
		}
		if cfg.Save != nil {
			fs, err := lp.save()
			if err == nil {
				err = cfg.Save(fs)
			}
			if err != nil {
				return lp.hist, err
			}
		}
		if cfg.Patience > 0 && lp.since >= cfg.Patience {
			break
		}
	}
	copy(tr.Net.Params.Data, bestData)
	copy(tr.Net.Params.State, bestState)
	return lp.hist, nil
}

// batchBuf is one batch being filled or trained on.
type batchBuf struct {
	x []float32
	y []int
	n int
}

// prefetch fills the batches of one epoch in order into the buffer
// indices it takes from free, handing each to ready, until steps batches
// are done or stop is closed. It is the only caller of src.Sample while
// it runs.
func prefetch(src SampleSource, bufs *[2]batchBuf, order []int, epoch, batch, steps, in int, ready chan<- int, free <-chan int, stop <-chan struct{}) {
	n := len(order)
	for s := 0; s < steps; s++ {
		var k int
		select {
		case k = <-free:
		case <-stop:
			return
		}
		lo, hi := s*batch, min((s+1)*batch, n)
		bb := &bufs[k]
		bb.n = hi - lo
		for j := 0; j < bb.n; j++ {
			bb.y[j] = src.Sample(order[lo+j], epoch, bb.x[j*in:(j+1)*in])
		}
		ready <- k
	}
}

// Evaluation is the result of [Evaluate].
type Evaluation struct {
	Loss     float64
	Accuracy float64
	Probs    []float32 // (N, L) softmax probabilities
	Labels   []int     // (N)
	Preds    []int     // (N) arg-max classes
}

// Evaluate runs net in inference mode over every sample of src (epoch 0,
// so no augmentation varies) and returns loss, accuracy and probabilities.
func Evaluate(net *Network, loss *SoftmaxCrossEntropy, src SampleSource, batch int) (*Evaluation, error) {
	n := src.Len()
	if n == 0 {
		return nil, fmt.Errorf("nn: empty evaluation set")
	}
	if batch < 1 {
		batch = 32
	}
	in, L := net.Input.Size(), loss.Classes
	x := make([]float32, batch*in)
	ev := &Evaluation{Probs: make([]float32, n*L), Labels: make([]int, n), Preds: make([]int, n)}
	var lossSum float64
	correct := 0
	for lo := 0; lo < n; lo += batch {
		hi := min(lo+batch, n)
		for k := lo; k < hi; k++ {
			ev.Labels[k] = src.Sample(k, 0, x[(k-lo)*in:(k-lo+1)*in])
		}
		logits := net.Forward(x[:(hi-lo)*in], hi-lo, false, nil)
		l, c, err := loss.Forward(logits, ev.Labels[lo:hi], nil)
		if err != nil {
			return nil, err
		}
		lossSum += l * float64(hi-lo)
		correct += c
		Softmax(ev.Probs[lo*L:hi*L], logits, L)
	}
	for i := 0; i < n; i++ {
		p := ev.Probs[i*L : (i+1)*L]
		best := 0
		for c := range p {
			if p[c] > p[best] {
				best = c
			}
		}
		ev.Preds[i] = best
	}
	ev.Loss, ev.Accuracy = lossSum/float64(n), float64(correct)/float64(n)
	return ev, nil
}

package nn

import (
	"fmt"
	"math"
)

// SoftmaxCrossEntropy is the loss of a classifier with L classes on logits
// (N, L). For sample i with label y and q = (1−ε)·onehot(y) + ε/L
// (label smoothing ε = Smoothing), the loss is
// w_y · Σ_c −q_c·log softmax(z_i)_c, and the batch loss is
// Σ_i loss_i / Σ_i w_{y_i}, the weighted mean PyTorch's CrossEntropyLoss
// uses (w = ClassWeights, all 1 when nil). The gradient with respect to
// the logits is w_y·(softmax(z_i) − q) / Σ_i w_{y_i}.
type SoftmaxCrossEntropy struct {
	Classes      int
	ClassWeights []float32 // (L) or nil
	Smoothing    float64   // in [0, 1)
	prob         []float64 // (L) scratch
}

// Check validates the loss configuration.
func (l *SoftmaxCrossEntropy) Check() error {
	if l.Classes < 2 {
		return fmt.Errorf("nn: loss needs at least 2 classes, got %d", l.Classes)
	}
	if l.ClassWeights != nil && len(l.ClassWeights) != l.Classes {
		return fmt.Errorf("nn: %d class weights for %d classes", len(l.ClassWeights), l.Classes)
	}
	for c, w := range l.ClassWeights {
		if !(w >= 0) || math.IsInf(float64(w), 0) {
			return fmt.Errorf("nn: class weight %d is %g", c, w)
		}
	}
	if !(l.Smoothing >= 0 && l.Smoothing < 1) {
		return fmt.Errorf("nn: label smoothing %g outside [0, 1)", l.Smoothing)
	}
	return nil
}

// Forward returns the batch loss and the number of samples whose largest
// logit is at the label, and writes the gradient into dlogits (N, L) if
// it is not nil. logits is (N, L); labels holds N class indices. It
// returns an error for a label out of range, a zero total weight or a
// non-finite loss (wrapping [ErrNonFinite]). It does not allocate after
// its first call.
func (l *SoftmaxCrossEntropy) Forward(logits []float32, labels []int, dlogits []float32) (loss float64, correct int, err error) {
	L := l.Classes
	n := len(labels)
	if len(logits) < n*L || (dlogits != nil && len(dlogits) < n*L) {
		panic(fmt.Sprintf("nn: SoftmaxCrossEntropy.Forward: %d logits, %d gradient slots for %d samples × %d classes", len(logits), len(dlogits), n, L))
	}
	if len(l.prob) != L {
		l.prob = make([]float64, L)
	}
	var wsum float64
	for _, y := range labels {
		if y < 0 || y >= L {
			return 0, 0, fmt.Errorf("nn: label %d outside 0..%d", y, L-1)
		}
		wsum += l.weight(y)
	}
	if wsum == 0 {
		return 0, 0, fmt.Errorf("nn: labels carry zero total class weight")
	}
	eps := l.Smoothing
	for i, y := range labels {
		z := logits[i*L : (i+1)*L]
		zmax, arg := math.Inf(-1), 0
		for c, v := range z {
			if float64(v) > zmax {
				zmax, arg = float64(v), c
			}
		}
		if arg == y {
			correct++
		}
		var sum float64
		for c, v := range z {
			e := math.Exp(float64(v) - zmax)
			l.prob[c] = e
			sum += e
		}
		logSum := math.Log(sum) + zmax
		w := l.weight(y)
		var li float64
		for c, v := range z {
			q := eps / float64(L)
			if c == y {
				q += 1 - eps
			}
			li -= q * (float64(v) - logSum)
			if dlogits != nil {
				dlogits[i*L+c] = float32(w * (l.prob[c]/sum - q) / wsum)
			}
		}
		loss += w * li
	}
	loss /= wsum
	if math.IsNaN(loss) || math.IsInf(loss, 0) {
		return loss, correct, fmt.Errorf("%w: loss %g", ErrNonFinite, loss)
	}
	return loss, correct, nil
}

func (l *SoftmaxCrossEntropy) weight(y int) float64 {
	if l.ClassWeights == nil {
		return 1
	}
	return float64(l.ClassWeights[y])
}

// Softmax writes softmax(z) of each row of logits (N, L) into dst.
func Softmax(dst, logits []float32, classes int) {
	for i := 0; i+classes <= len(logits); i += classes {
		z := logits[i : i+classes]
		zmax := float32(math.Inf(-1))
		for _, v := range z {
			zmax = max(zmax, v)
		}
		var sum float64
		for c, v := range z {
			e := math.Exp(float64(v - zmax))
			dst[i+c] = float32(e)
			sum += e
		}
		for c := range z {
			dst[i+c] = float32(float64(dst[i+c]) / sum)
		}
	}
}

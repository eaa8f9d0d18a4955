package pipit

import (
	"fmt"
	"math"
	"slices"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/nn"
)

// Ensemble is several models of one task (the fold models of a
// cross-validation, say) that vote together: the mean of their softmax
// window probabilities. It is a [Model] whose inputs are log-mel windows
// before normalisation (its Info has no band statistics), since each
// member normalises with the statistics of its own training folds. A
// device runs one model; an ensemble says what averaging would buy at N
// times the inference cost.
type Ensemble struct {
	Members []Model
	info    datasets.ModelInfo
}

// NewEnsemble joins models that share classes (in order), front end and
// window; it refuses others, naming the first that differs.
func NewEnsemble(models ...Model) (*Ensemble, error) {
	if len(models) == 0 {
		return nil, fmt.Errorf("pipit: ensemble: no models")
	}
	a := models[0].Info()
	for i, m := range models[1:] {
		b := m.Info()
		if !slices.Equal(a.Classes, b.Classes) || a.FrontEnd != b.FrontEnd || a.Window != b.Window {
			return nil, fmt.Errorf("pipit: ensemble: model %d has other classes, front end or window than model 0", i+1)
		}
		if b.Stats == nil {
			return nil, fmt.Errorf("pipit: ensemble: model %d has no band statistics", i+1)
		}
	}
	e := &Ensemble{Members: models, info: *a}
	e.info.Stats = nil
	return e, nil
}

// Info implements Model: the first member's info without band statistics.
func (e *Ensemble) Info() *datasets.ModelInfo { return &e.info }

// Predict implements Model: x holds n windows before normalisation; dst
// gets the logarithm of the members' mean probabilities, so that softmax
// gives the mean and arg-max the ensemble's class.
func (e *Ensemble) Predict(dst, x []float32, n int) {
	L := len(e.info.Classes)
	if n == 0 || len(x)%n != 0 || len(dst) != n*L {
		panic(fmt.Sprintf("pipit: Ensemble.Predict: len(x) = %d, len(dst) = %d for %d inputs and %d classes", len(x), len(dst), n, L))
	}
	in := len(x) / n
	buf := make([]float32, len(x))
	p := make([]float32, n*L)
	mean := make([]float64, n*L)
	for _, m := range e.Members {
		copy(buf, x)
		st := m.Info().Stats
		for i := 0; i < n; i++ {
			st.Apply(buf[i*in : (i+1)*in])
		}
		m.Predict(p, buf, n)
		nn.Softmax(p, p, L)
		for i, v := range p {
			mean[i] += float64(v)
		}
	}
	k := float64(len(e.Members))
	for i, v := range mean {
		dst[i] = float32(math.Log(max(v/k, 1e-30)))
	}
}

// Close implements Model: it closes every member.
func (e *Ensemble) Close() {
	for _, m := range e.Members {
		m.Close()
	}
}

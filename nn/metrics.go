package nn

import (
	"fmt"
	"strings"
)

// Confusion is a confusion matrix: Counts[t][p] is the number of samples
// of true class t predicted as p.
type Confusion struct {
	Counts [][]int `json:"counts"`
}

// NewConfusion tallies labels against predictions for classes classes. It
// returns an error if the slices differ in length or a class is out of range.
func NewConfusion(classes int, labels, preds []int) (*Confusion, error) {
	if len(labels) != len(preds) {
		return nil, fmt.Errorf("nn: %d labels for %d predictions", len(labels), len(preds))
	}
	c := &Confusion{Counts: make([][]int, classes)}
	for i := range c.Counts {
		c.Counts[i] = make([]int, classes)
	}
	for i, t := range labels {
		p := preds[i]
		if t < 0 || t >= classes || p < 0 || p >= classes {
			return nil, fmt.Errorf("nn: class %d or %d outside 0..%d", t, p, classes-1)
		}
		c.Counts[t][p]++
	}
	return c, nil
}

// ClassMetrics are one class's figures. A ratio with a zero denominator is
// 0 (scikit-learn's zero_division=0 convention).
type ClassMetrics struct {
	Labelled  int     `json:"labelled"` // samples whose true class this is
	Recall    float64 `json:"recall"`
	Precision float64 `json:"precision"`
	F1        float64 `json:"f1"`
}

// Metrics summarise a confusion matrix.
type Metrics struct {
	Accuracy         float64        `json:"accuracy"`
	BalancedAccuracy float64        `json:"balanced_accuracy"` // mean recall over classes that occur in the truth
	MacroF1          float64        `json:"macro_f1"`          // mean F1 over all classes
	PerClass         []ClassMetrics `json:"per_class"`
	Samples          int            `json:"samples"`
}

// Metrics computes accuracy, balanced accuracy, per-class precision,
// recall and F1 = 2PR/(P+R), and macro F1.
func (c *Confusion) Metrics() Metrics {
	L := len(c.Counts)
	m := Metrics{PerClass: make([]ClassMetrics, L)}
	var diag, total int
	colSum := make([]int, L)
	for t := 0; t < L; t++ {
		for p := 0; p < L; p++ {
			total += c.Counts[t][p]
			colSum[p] += c.Counts[t][p]
		}
		diag += c.Counts[t][t]
	}
	m.Samples = total
	if total > 0 {
		m.Accuracy = float64(diag) / float64(total)
	}
	ratio := func(a, b int) float64 {
		if b == 0 {
			return 0
		}
		return float64(a) / float64(b)
	}
	present := 0
	for k := 0; k < L; k++ {
		row := 0
		for p := 0; p < L; p++ {
			row += c.Counts[k][p]
		}
		cm := ClassMetrics{Precision: ratio(c.Counts[k][k], colSum[k]), Recall: ratio(c.Counts[k][k], row), Labelled: row}
		if cm.Precision+cm.Recall > 0 {
			cm.F1 = 2 * cm.Precision * cm.Recall / (cm.Precision + cm.Recall)
		}
		m.PerClass[k] = cm
		m.MacroF1 += cm.F1 / float64(L)
		if row > 0 {
			m.BalancedAccuracy += cm.Recall
			present++
		}
	}
	if present > 0 {
		m.BalancedAccuracy /= float64(present)
	}
	return m
}

// Text formats the matrix with class names (rows: true, columns: predicted).
func (c *Confusion) Text(names []string) string {
	var b strings.Builder
	w := len("true \\ predicted")
	for t, n := range names {
		w = max(w, len(fmt.Sprintf("%d %s", t, n)))
	}
	fmt.Fprintf(&b, "%*s", w, "true \\ predicted")
	for k := range names {
		fmt.Fprintf(&b, " %5d", k)
	}
	b.WriteByte('\n')
	for t, row := range c.Counts {
		fmt.Fprintf(&b, "%*s", w, fmt.Sprintf("%d %s", t, names[t]))
		for _, v := range row {
			fmt.Fprintf(&b, " %5d", v)
		}
		b.WriteByte('\n')
	}
	return b.String()
}

package nn

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

func TestMetricsWorkedExample(t *testing.T) {
	// Confusion matrix (rows true, columns predicted):
	//   A: 5 1 0    B: 2 3 1    C: 0 2 6      column sums 7, 6, 7; total 20
	// accuracy = (5+3+6)/20 = 0.7
	// A: P = 5/7 = 0.714286, R = 5/6 = 0.833333, F1 = 2PR/(P+R) = 50/65 = 0.769231
	// B: P = 3/6 = 0.5,      R = 3/6 = 0.5,      F1 = 0.5
	// C: P = 6/7 = 0.857143, R = 6/8 = 0.75,     F1 = 36/45 = 0.8
	// balanced accuracy = (5/6 + 1/2 + 3/4)/3 = 0.694444
	// macro F1 = (0.769231 + 0.5 + 0.8)/3 = 0.689744
	counts := [][]int{{5, 1, 0}, {2, 3, 1}, {0, 2, 6}}
	var labels, preds []int
	for tc, row := range counts {
		for p, n := range row {
			for k := 0; k < n; k++ {
				labels, preds = append(labels, tc), append(preds, p)
			}
		}
	}
	c, err := NewConfusion(3, labels, preds)
	if err != nil {
		t.Fatal(err)
	}
	m := c.Metrics()
	near := func(name string, got, want float64) {
		if math.Abs(got-want) > 5e-7 {
			t.Errorf("%s = %.6f, want %.6f", name, got, want)
		}
	}
	near("accuracy", m.Accuracy, 0.7)
	near("balanced accuracy", m.BalancedAccuracy, 0.694444)
	near("macro F1", m.MacroF1, 0.689744)
	want := [][3]float64{{0.714286, 0.833333, 0.769231}, {0.5, 0.5, 0.5}, {0.857143, 0.75, 0.8}}
	for k, w := range want {
		if got := m.PerClass[k].Labelled; got != []int{6, 6, 8}[k] { // row sums above
			t.Errorf("class %d: %d labelled, want %d", k, got, []int{6, 6, 8}[k])
		}
		near("precision", m.PerClass[k].Precision, w[0])
		near("recall", m.PerClass[k].Recall, w[1])
		near("F1", m.PerClass[k].F1, w[2])
	}
	if _, err := NewConfusion(3, []int{0, 3}, []int{0, 1}); err == nil {
		t.Error("out-of-range class gave no error")
	}
}

func TestMetricsAgainstNumpy(t *testing.T) {
	// Values: testdata/gen/metrics_golden.py (numpy 1.24.2), which also
	// exercises a class that is never predicted (precision 0 by the
	// zero_division=0 convention).
	raw, err := os.ReadFile(filepath.Join("testdata", "metrics_golden.json"))
	if err != nil {
		t.Fatal(err)
	}
	var g struct {
		Classes               int
		Labels, Preds         []int
		Confusion             [][]int
		Accuracy              float64
		BalancedAccuracy      float64 `json:"balanced_accuracy"`
		MacroF1               float64 `json:"macro_f1"`
		Precision, Recall, F1 []float64
	}
	if err := json.Unmarshal(raw, &g); err != nil {
		t.Fatal(err)
	}
	c, err := NewConfusion(g.Classes, g.Labels, g.Preds)
	if err != nil {
		t.Fatal(err)
	}
	for i := range g.Confusion {
		for j := range g.Confusion[i] {
			if c.Counts[i][j] != g.Confusion[i][j] {
				t.Fatalf("confusion[%d][%d] = %d, numpy %d", i, j, c.Counts[i][j], g.Confusion[i][j])
			}
		}
	}
	m := c.Metrics()
	for _, v := range [][2]float64{{m.Accuracy, g.Accuracy}, {m.BalancedAccuracy, g.BalancedAccuracy}, {m.MacroF1, g.MacroF1}} {
		if math.Abs(v[0]-v[1]) > 1e-12 {
			t.Errorf("summary metric %.12f, numpy %.12f", v[0], v[1])
		}
	}
	for k := range g.F1 {
		pc := m.PerClass[k]
		if math.Abs(pc.Precision-g.Precision[k]) > 1e-12 || math.Abs(pc.Recall-g.Recall[k]) > 1e-12 || math.Abs(pc.F1-g.F1[k]) > 1e-12 {
			t.Errorf("class %d: %+v, numpy P %.6f R %.6f F1 %.6f", k, pc, g.Precision[k], g.Recall[k], g.F1[k])
		}
	}
}

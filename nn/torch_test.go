package nn

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"
)

type torchGolden struct {
	Arch    string    `json:"arch"`
	Classes int       `json:"classes"`
	Torch   string    `json:"torch"`
	Params  []float32 `json:"params"`
	State   []float32 `json:"state"`
	Input   []float32 `json:"input"`
	Eval    []float32 `json:"eval"`
	Train   []float32 `json:"train"`
	Labels  []int     `json:"labels"`
	Loss    float64   `json:"loss"`
	Grad    []float32 `json:"grad"`
}

// TestArchitecturesMatchPyTorch loads the weights and outputs written by
// testdata/gen/arch_forward.py (PyTorch 1.13 CPU, Debian python3-torch) and
// requires pipit's forward pass of the same network, in inference and in
// training mode, to agree within a relative error of 1e-4 (of the largest
// logit magnitude; float32 sums over up to 576 terms per output).
func TestArchitecturesMatchPyTorch(t *testing.T) {
	const relTol = 1e-4
	for _, arch := range ArchNames() {
		t.Run(arch, func(t *testing.T) {
			raw, err := os.ReadFile(filepath.Join("testdata", "arch_"+arch+".json"))
			if err != nil {
				t.Fatal(err)
			}
			var g torchGolden
			if err := json.Unmarshal(raw, &g); err != nil {
				t.Fatal(err)
			}
			net, err := Arch(arch, g.Classes, 1)
			if err != nil {
				t.Fatal(err)
			}
			defer net.Close()
			if len(g.Params) != len(net.Params.Data) || len(g.State) != len(net.Params.State) {
				t.Fatalf("golden has %d params and %d state, network %d and %d", len(g.Params), len(g.State), len(net.Params.Data), len(net.Params.State))
			}
			copy(net.Params.Data, g.Params)
			copy(net.Params.State, g.State)
			n := len(g.Input) / ReferenceInput.Size()
			for _, mode := range []struct {
				name  string
				train bool
				want  []float32
			}{{"inference", false, g.Eval}, {"training", true, g.Train}} {
				got := net.Forward(g.Input, n, mode.train, nil)
				var worst, scale float64
				for i, w := range mode.want {
					worst = math.Max(worst, math.Abs(float64(got[i]-w)))
					scale = math.Max(scale, math.Abs(float64(w)))
				}
				if worst > relTol*scale {
					t.Errorf("%s mode: max |pipit − torch| = %.3g, %.2g of the largest logit %.3g (tolerance %g)", mode.name, worst, worst/scale, scale, relTol)
				}
			}
			// One training step's loss and gradients (F.cross_entropy and
			// autograd in the script). Gradients pass through every layer's
			// backward; tolerance 1e-4 of the largest gradient (float32
			// accumulation over whole batches).
			copy(net.Params.State, g.State)
			logits := net.Forward(g.Input, n, true, nil)
			loss := &SoftmaxCrossEntropy{Classes: g.Classes}
			dz := make([]float32, len(logits))
			l, _, err := loss.Forward(logits, g.Labels, dz)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(l-g.Loss) > 1e-5*math.Abs(g.Loss) {
				t.Errorf("loss %.7f, torch %.7f", l, g.Loss)
			}
			net.Params.ZeroGrad()
			net.Backward(g.Input, dz, n)
			var worst, scale float64
			for i, w := range g.Grad {
				worst = math.Max(worst, math.Abs(float64(net.Params.Grad[i]-w)))
				scale = math.Max(scale, math.Abs(float64(w)))
			}
			if worst > 1e-4*scale {
				t.Errorf("gradients: max |pipit − torch| = %.3g, largest gradient %.3g", worst, scale)
			}
			t.Logf("gradient agreement: max difference %.2g of the largest gradient", worst/scale)
		})
	}
}

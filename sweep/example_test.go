package sweep_test

import (
	"fmt"
	"strings"

	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/sweep"
)

// A grid of two band counts and two hops on the separable network, priced
// against the half-chip profile before any training.
func ExampleExpand() {
	g, err := sweep.ParseGrid("yard.grid", strings.NewReader("pipit-grid 1\nbands 40 20\nhop 256 512\n"))
	if err != nil {
		panic(err)
	}
	classes := []string{"circular_saw", "hammering", "quiet", "voices"}
	p, err := sweep.Expand(g, sweep.PlanInput{Data: "yard/manifest.csv", Classes: classes, Folds: 5, Profile: nn.Profiles["m4-half"]})
	if err != nil {
		panic(err)
	}
	fmt.Println(p.Summary())
	for _, j := range p.Jobs {
		fmt.Printf("%d: input %dx%d, %.2f M MAC/s whole path\n", j.Index, j.FrontEnd.Bands, j.InputFrames, j.Cost.ComputePerSecond/1e6)
	}
	// Output:
	// 4 grid points → 4 jobs; 0 pruned before training against m4-half
	// 0: input 40x61, 1.91 M MAC/s whole path
	// 1: input 20x61, 1.46 M MAC/s whole path
	// 2: input 40x31, 0.96 M MAC/s whole path
	// 3: input 20x31, 0.73 M MAC/s whole path
}

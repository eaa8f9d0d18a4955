// Command yard walks through the whole path with pipit's library alone, as
// `pipit demo` does, on a small synthetic timber-yard corpus: generate
// clips, train the separable network with fold 0 held out for testing and
// fold 1 for validation (early stopping never sees the test fold), cost it
// against a device profile, calibrate it to int8 on the validation fold,
// compare float and int8 on the test fold, export it, and check the export
// against the Go engine: read back, compiled C, C front end, and an
// emulated Cortex-M4 when the cross tools are installed.
//
//	go run ./examples/yard [DIR]
package main

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"

	"github.com/pipit-audio/pipit"
	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant/cref"
)

func main() {
	dir, err := os.MkdirTemp("", "yard")
	if len(os.Args) > 1 {
		dir, err = os.Args[1], os.MkdirAll(os.Args[1], 0o755)
	}
	check(err)

	// 1. A corpus: 8 classes × 16 clips × 1 s in 4 group-safe folds.
	_, err = datasets.Synthesize(filepath.Join(dir, "corpus"), datasets.SynthConfig{ClipsPerClass: 16, Folds: 4, Seed: 4}, nil)
	check(err)
	data := pipit.Data{Path: filepath.Join(dir, "corpus", "manifest.csv")}
	corpus, err := pipit.OpenCorpus(data, 0, 1)
	check(err)

	// 2. Train on folds 2 and 3, stop early on fold 1, test on fold 0.
	recipe := pipit.DefaultRecipe()
	recipe.Epochs, recipe.Batch = 40, 16
	model := filepath.Join(dir, "model.pnet")
	tr, err := pipit.Train(corpus, pipit.TrainConfig{Arch: "separable", FrontEnd: features.DefaultConfig(), Overlap: 0.5,
		TestFold: "0", ValFold: "1", Recipe: recipe, Out: model, Replace: true}, nil)
	check(err)
	fmt.Printf("trained %d epochs (best %d): validation fold %.3f, test fold %.3f (clips %.3f)\n",
		tr.Epochs, tr.BestEpoch, tr.ValAccuracy, tr.TestAccuracy, tr.TestClipAccuracy)

	// 3. What it costs on the device, one inference per half second.
	fm, err := pipit.LoadFloatModel(model)
	check(err)
	defer fm.Close()
	cost := nn.Cost(fm.Net, 1)
	profile, err := nn.LookupProfile("m4-half")
	check(err)
	verdict := cost.Check(profile, 2)
	fmt.Printf("cost: %d MACs, %d parameters, %d B RAM (int8); fits %s: %v\n", cost.MACs, cost.Params, cost.RAMBytes, profile.Name, verdict.Fits)

	// 4. int8: calibrate on the validation fold, compare on the test fold.
	qr, err := pipit.Quantize(fm, pipit.QuantizeConfig{Data: data, Out: filepath.Join(dir, "model.pq8")}, nil)
	check(err)
	fmt.Printf("test fold: float %.3f, int8 %.3f (ranges by %s, logit correlation %.4f)\n", qr.FloatAccuracy, qr.Int8Accuracy, qr.Method, qr.LogitCorr)

	// 5. Export for a device, and read it back on every test window.
	e, err := pipit.Export(qr.Model, filepath.Join(dir, "export"))
	check(err)
	fmt.Printf("export: %d-byte blob (CRC-32 %s), %d-byte RAM pool, %d MACs, in %s\n", e.FlashBytes, e.CRC32, e.RAMBytes, e.MACs, e.Dir)
	test, err := pipit.LoadFold(fm.ModelInfo, data, "", nil)
	check(err)
	inputs := pipit.Int8Inputs(qr.Model, test)
	back, err := pipit.VerifyRoundTrip(qr.Model, e, inputs)
	check(err)
	fmt.Printf("read back: identical logits on all %d test windows\n", len(inputs))

	// 6. The C runtime and the C front end against the Go engine.
	cc, err := exec.LookPath("gcc")
	if err != nil {
		fmt.Println("no gcc: C checks skipped")
		return
	}
	check(pipit.VerifyC(back, e, inputs[:8], cc, filepath.Join(dir, "cref")))
	fc, audio, err := pipit.VerifyCFrontEnd(qr.Model, test, cc, filepath.Join(dir, "cfe"))
	check(err)
	fmt.Printf("C runtime: bit-exact on 8 windows at every layer; C front end: %d/%d features as Go's, %d/%d same predictions\n",
		fc.Identical, fc.Values, fc.SamePredictions, fc.Windows)

	// 7. Front end + network on an emulated Cortex-M4.
	if _, err := cref.FindM4Tools(); err != nil {
		fmt.Println("emulated Cortex-M4 skipped:", err)
		return
	}
	oc, err := pipit.Onchip(qr.Model, pipit.JoinAudio(audio[:4]), 2, 160, filepath.Join(dir, "m4"))
	check(err)
	fmt.Printf("emulated Cortex-M4: logits bit-exact %v, %.2f instructions per MAC, stack %d B\n", oc.LogitsBitExact && oc.RecLogitsExact, oc.InstrPerMAC, oc.StackBytes)
}

func check(err error) {
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
}

package pipit

import (
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"time"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant/cref"
)

// DemoConfig configures [Demo].
type DemoConfig struct {
	Dir    string // output directory (corpus, models, export, build files)
	CC     string // host C compiler for the C checks (default "gcc")
	Epochs int    // maximum training epochs (default 40)
}

// DemoReport is what [Demo] did and measured.
type DemoReport struct {
	OutDir           string  `json:"out_dir"`
	Arch             string  `json:"arch"`
	Profile          string  `json:"profile"`
	FloatAccuracy    float64 `json:"float_accuracy"`
	Int8Accuracy     float64 `json:"int8_accuracy"`
	FloatClipAcc     float64 `json:"float_clip_accuracy"`
	Int8ClipAcc      float64 `json:"int8_clip_accuracy"`
	MACs             int64   `json:"macs"`
	Params           int     `json:"params"`
	FlashBytes       int     `json:"flash_bytes"`
	RAMBytes         int     `json:"ram_bytes"`
	MACsPerSecond    float64 `json:"macs_per_second"`
	RAMFits          bool    `json:"ram_fits"`
	FlashFits        bool    `json:"flash_fits"`
	ComputeFits      bool    `json:"compute_fits"`
	Fits             bool    `json:"fits"`
	BitExact         bool    `json:"bit_exact"`
	BitExactWindows  int     `json:"bit_exact_windows"`
	RoundTripWindows int     `json:"round_trip_windows"`
	Seconds          float64 `json:"seconds"`
	Corpus           string  `json:"corpus"`
	Model            string  `json:"model"`
	QModel           string  `json:"int8_model"`
	Export           string  `json:"export_dir"`
	// the whole path (C front end + network) and the emulated board
	FrontEnd     features.DeviceCost `json:"front_end"`
	WholePath    WholePath           `json:"whole_path"`
	FrontEndTest *FrontEndCheck      `json:"front_end_check,omitempty"` // host C front end on the test fold
	Onchip       *OnchipReport       `json:"onchip,omitempty"`          // nil when the cross tools are missing
	OnchipNote   string              `json:"onchip_note,omitempty"`
}

// DemoProfile is the device profile the demo is judged against.
const DemoProfile = "m4-half"

// Demo runs the whole path on the synthetic timber-yard corpus: it
// synthesises the corpus, trains the separable network with fold 0 held
// out for testing and fold 1 for validation, costs it against
// [DemoProfile], calibrates it to int8 on the validation fold, evaluates
// float and int8 on the test fold, exports it, reads the export back and
// runs every test window through it, compiles the C reference runtime and
// compares it with the Go engine layer by layer, runs every test clip
// through the C front end and C network, and, when the cross tools are
// installed, runs front end + network on an emulated Cortex-M4. Any
// difference from the Go engine is an error.
func Demo(cfg DemoConfig, rep Reporter) (*DemoReport, error) {
	t0 := time.Now()
	rep = orQuiet(rep)
	if cfg.CC == "" {
		cfg.CC = "gcc"
	}
	if cfg.Epochs == 0 {
		cfg.Epochs = 40
	}
	cc, err := exec.LookPath(cfg.CC)
	if err != nil {
		return nil, fmt.Errorf("pipit: the bit-exactness check needs a C compiler (%s): %w", cfg.CC, err)
	}
	out := cfg.Dir
	r := &DemoReport{OutDir: out, Arch: "separable", Profile: DemoProfile,
		Corpus: filepath.Join(out, "corpus"), Model: filepath.Join(out, "model.pnet"), QModel: filepath.Join(out, "model.pq8"), Export: filepath.Join(out, "export")}
	profile, err := nn.LookupProfile(DemoProfile)
	if err != nil {
		return nil, err
	}
	step := func(n int, what string) { rep.Note(fmt.Sprintf("\n[%d/9] %s", n, what)) }

	step(1, "synthesise the timber-yard corpus (8 classes × 40 clips × 1 s)")
	rep.Stage("synth")
	if _, err := datasets.Synthesize(r.Corpus, datasets.SynthConfig{Seed: 1}, func(d, t int) { rep.Step(d, t, "clips", "") }); err != nil {
		return nil, err
	}
	rep.Done("written")

	step(2, "train the separable network (test fold 0, validation fold 1)")
	data := Data{Path: filepath.Join(r.Corpus, "manifest.csv"), CacheDir: filepath.Join(out, "cache")}
	corpus, err := OpenCorpus(data, 0, 1)
	if err != nil {
		return nil, err
	}
	recipe := DefaultRecipe()
	recipe.Epochs = cfg.Epochs
	// The demo owns its folder: a run of an earlier, interrupted demo is
	// not carried on.
	if err := os.RemoveAll(r.Model + UnfinishedSuffix); err != nil {
		return nil, fmt.Errorf("pipit: demo: %w", err)
	}
	if _, err := Train(corpus, TrainConfig{Arch: r.Arch, FrontEnd: features.DefaultConfig(), Overlap: 0.5, TestFold: "0", ValFold: "1",
		Recipe: recipe, CacheDir: data.CacheDir, Out: r.Model, Replace: true}, rep); err != nil {
		return nil, err
	}

	step(3, "cost against the "+DemoProfile+" profile (1 s windows, 50 % overlap, int8)")
	fm, err := LoadFloatModel(r.Model)
	if err != nil {
		return nil, err
	}
	defer fm.Close()
	cost := nn.Cost(fm.Net, 1)
	ips, err := nn.InferencesPerSecond(1, 0.5)
	if err != nil {
		return nil, err
	}
	v := cost.Check(profile, ips)
	r.MACs, r.Params, r.MACsPerSecond = cost.MACs, cost.Params, v.MACsPerSecond
	r.RAMFits, r.FlashFits, r.ComputeFits = v.RAMFits, v.FlashFits, v.ComputeFits
	rep.Note(fmt.Sprintf("%d MACs, %d parameters, %.0f MAC/s: %s", cost.MACs, cost.Params, v.MACsPerSecond, map[bool]string{true: "fits", false: "does not fit"}[v.Fits]))

	step(4, "calibrate to int8 (validation fold) and compare float and int8 on the test fold")
	qr, err := Quantize(fm, QuantizeConfig{Data: data, Out: r.QModel}, rep)
	if err != nil {
		return nil, err
	}
	r.FloatAccuracy, r.Int8Accuracy, r.FloatClipAcc, r.Int8ClipAcc = qr.FloatAccuracy, qr.Int8Accuracy, qr.FloatClipAcc, qr.Int8ClipAcc
	rep.Note(fmt.Sprintf("float %.3f, int8 %.3f (%s ranges)", qr.FloatAccuracy, qr.Int8Accuracy, qr.Method))

	step(5, "export blob + scheme + C header")
	q := qr.Model
	e, err := Export(q, r.Export)
	if err != nil {
		return nil, err
	}
	r.FlashBytes, r.RAMBytes = e.FlashBytes, e.RAMBytes
	// judge flash on the blob actually written (header, table and padding included)
	r.FlashFits = int64(e.FlashBytes) <= profile.FlashBytes
	rep.Note(fmt.Sprintf("%s: %d bytes, CRC-32 %s; RAM pool %d bytes", e.Blob, e.FlashBytes, e.CRC32, e.RAMBytes))

	step(6, "read the export back and run the whole test fold through it")
	test, _ := corpus.Split(0)
	set, err := newLoader(corpus, data, fm.ModelInfo.FrontEnd, fm.ModelInfo.Window, rep).load("test", test, false, fm.ModelInfo.Stats)
	if err != nil {
		return nil, err
	}
	inputs := Int8Inputs(q, set)
	back, err := VerifyRoundTrip(q, e, inputs)
	if err != nil {
		return nil, err
	}
	r.RoundTripWindows = len(inputs)
	rep.Note(fmt.Sprintf("%d test windows: identical logits", len(inputs)))

	step(7, "compile the C reference runtime and compare every layer with the Go engine")
	few := inputs[:min(8, len(inputs))]
	if err := VerifyC(back, e, few, cc, filepath.Join(out, "cref")); err != nil {
		return nil, err
	}
	r.BitExact, r.BitExactWindows = true, len(few)
	rep.Note(fmt.Sprintf("%d windows × %d layers: same bits", len(few), len(back.Layers)))

	step(8, "C front end + C network (host) on every test clip against the Go path")
	if r.FrontEnd, err = features.CostOnDevice(fm.ModelInfo.FrontEnd, fm.ModelInfo.Window.Frames); err != nil {
		return nil, err
	}
	r.WholePath = NewWholePath(cost, v, r.FrontEnd, profile)
	var recording []*features.Audio
	if r.FrontEndTest, recording, err = VerifyCFrontEnd(q, set, cc, filepath.Join(out, "cfe")); err != nil {
		return nil, err
	}
	fc := r.FrontEndTest
	rep.Note(fmt.Sprintf("%d clips: %d/%d int8 features identical (worst %d LSB), %d/%d same predictions, logits bit-exact: %v",
		fc.Clips, fc.Identical, fc.Values, fc.WorstLSB, fc.SamePredictions, fc.Windows, fc.LogitsBitExact))

	step(9, "emulated Cortex-M4 (arm-none-eabi-gcc, QEMU mps2-an386) on test windows and a recording")
	if _, err := cref.FindM4Tools(); err != nil {
		r.OnchipNote = "skipped: " + err.Error()
		rep.Note(r.OnchipNote)
	} else {
		rec := JoinAudio(recording[:min(8, len(recording))]) // 8 s of the held-out fold
		if r.Onchip, err = Onchip(q, rec, 4, 160, filepath.Join(out, "m4")); err != nil {
			return nil, err
		}
		oc := r.Onchip
		rep.Note(fmt.Sprintf("logits bit-exact: %v (test inputs), %v (%d recording inputs); %.2f instructions per MAC; stack %d B",
			oc.LogitsBitExact, oc.RecLogitsExact, oc.RecordingInputs, oc.InstrPerMAC, oc.StackBytes))
		if !oc.LogitsBitExact || !oc.RecLogitsExact || !oc.FastLogitsBitExact || oc.FastRequantDiffer != 0 {
			return nil, fmt.Errorf("pipit: the emulated Cortex-M4's logits differ from the Go engine's")
		}
	}
	r.Fits = r.RAMFits && r.FlashFits && r.ComputeFits && r.WholePath.Fits
	r.Seconds = time.Since(t0).Seconds()
	return r, nil
}

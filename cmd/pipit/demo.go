package main

import (
	"bytes"
	"fmt"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
	"github.com/pipit-audio/pipit/quant/cref"
)

type demoReport struct {
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
	WholePath    wholePath           `json:"whole_path"`
	FrontEndTest *frontEndCheck      `json:"front_end_check,omitempty"` // host C front end on the test fold
	Onchip       *onchipReport       `json:"onchip,omitempty"`          // nil when the cross tools are missing
	OnchipNote   string              `json:"onchip_note,omitempty"`
}

// frontEndCheck compares the C front end (host build) with the Go front
// end on every test-fold clip.
type frontEndCheck struct {
	Clips           int  `json:"clips"`
	Windows         int  `json:"windows"`
	Values          int  `json:"values"`
	Identical       int  `json:"identical"`
	WorstLSB        int  `json:"worst_lsb"`
	SamePredictions int  `json:"same_predictions"` // C front end + C network vs Go front end + Go engine
	LogitsBitExact  bool `json:"logits_bit_exact"` // C network on the C features vs the Go engine on them
}

func newDemoCmd() *cobra.Command {
	var out, cc string
	var asJSON bool
	var epochs int
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run the whole path on built-in demo data: corpus → training → int8 → export → C check",
		Long: `demo needs no input. It generates the synthetic timber-yard corpus, trains
the separable network with fold 0 held out, prints its cost against the
m4-half profile, calibrates it to int8, evaluates float and int8 on the
held-out fold, exports blob + scheme + C header, compiles the C reference
runtime and runs it on test windows to show it computes the same bits as
the Go engine, and prints a summary. It exits non-zero if any step fails.`,
		Args: cobra.NoArgs,
	}
	cmd.Flags().StringVar(&out, "out", "pipit-demo", "output directory")
	cmd.Flags().BoolVar(&asJSON, "json", false, "print the summary as JSON")
	cmd.Flags().IntVar(&epochs, "epochs", 40, "maximum training epochs")
	cmd.Flags().StringVar(&cc, "cc", "gcc", "C compiler for the bit-exactness check")
	cmd.RunE = func(cmd *cobra.Command, _ []string) error {
		rep, err := runDemo(out, cc, epochs, cmd.ErrOrStderr())
		if err != nil {
			return err
		}
		if asJSON {
			return printJSON(cmd.OutOrStdout(), rep)
		}
		printDemo(cmd.OutOrStdout(), rep)
		return nil
	}
	return cmd
}

func step(w io.Writer, n int, what string) { fmt.Fprintf(w, "\n[%d/9] %s\n", n, what) }

func runDemo(out, cc string, epochs int, stderr io.Writer) (*demoReport, error) {
	t0 := time.Now()
	if err := os.MkdirAll(out, 0o755); err != nil {
		return nil, err
	}
	ccPath, err := exec.LookPath(cc)
	if err != nil {
		return nil, fmt.Errorf("the bit-exactness check needs a C compiler (%s): %w", cc, err)
	}
	rep := &demoReport{OutDir: out, Arch: "separable", Profile: "m4-half",
		Corpus: filepath.Join(out, "corpus"), Model: filepath.Join(out, "model.pnet"), QModel: filepath.Join(out, "model.pq8"), Export: filepath.Join(out, "export")}

	step(stderr, 1, "synthesise the timber-yard corpus (8 classes × 40 clips × 1 s)")
	b := newTask(stderr, "synth")
	if _, err := datasets.Synthesize(rep.Corpus, datasets.SynthConfig{Seed: 1}, func(d, t int) { b.step(d, t, "clips", "") }); err != nil {
		return nil, err
	}
	b.finish("written")

	step(stderr, 2, "train the separable network (test fold 0, validation fold 1)")
	cache := filepath.Join(out, "cache")
	o := &trainOptions{data: filepath.Join(rep.Corpus, "manifest.csv"), arch: "separable", out: rep.Model, cacheDir: cache, pad: datasets.PadZeros,
		folds: 5, epochs: epochs, batch: 32, patience: 10, seed: 1, lr: 0.005, overlap: 0.5, fe: features.DefaultConfig()}
	corpus, err := openCorpus(o)
	if err != nil {
		return nil, err
	}
	if _, err := trainOne(o, corpus, 0, 1, rep.Model, stderr); err != nil {
		return nil, err
	}

	step(stderr, 3, "cost against the m4-half profile (1 s windows, 50 % overlap, int8)")
	net, err := nn.Arch("separable", len(corpus.Classes), 1)
	if err != nil {
		return nil, err
	}
	cost := nn.Cost(net, 1)
	net.Close()
	ips, _ := nn.InferencesPerSecond(1, 0.5)
	v := cost.Check(nn.Profiles["m4-half"], ips)
	rep.MACs, rep.Params, rep.MACsPerSecond = cost.MACs, cost.Params, v.MACsPerSecond
	rep.RAMFits, rep.FlashFits, rep.ComputeFits, rep.Fits = v.RAMFits, v.FlashFits, v.ComputeFits, v.Fits
	fmt.Fprintf(stderr, "%d MACs, %d parameters, %.0f MAC/s: %s\n", cost.MACs, cost.Params, v.MACsPerSecond, map[bool]string{true: "fits", false: "does not fit"}[v.Fits])

	step(stderr, 4, "calibrate to int8 (validation fold) and compare float and int8 on the test fold")
	qr, err := runQuantize(rep.Model, o.data, "", cache, rep.QModel, -2, quant.Config{Method: quant.MethodAuto, Scheme: quant.Scheme{Weights: quant.PerChannel}}, qatOptions{}, stderr)
	if err != nil {
		return nil, err
	}
	rep.FloatAccuracy, rep.Int8Accuracy, rep.FloatClipAcc, rep.Int8ClipAcc = qr.FloatAccuracy, qr.Int8Accuracy, qr.FloatClipAcc, qr.Int8ClipAcc
	fmt.Fprintf(stderr, "float %.3f, int8 %.3f (%s ranges)\n", qr.FloatAccuracy, qr.Int8Accuracy, qr.Method)

	step(stderr, 5, "export blob + scheme + C header")
	q, err := quant.ReadModelFile(rep.QModel)
	if err != nil {
		return nil, err
	}
	er, err := runExport(q, rep.Export)
	if err != nil {
		return nil, err
	}
	rep.FlashBytes, rep.RAMBytes = er.FlashBytes, er.RAMBytes
	// judge flash on the blob actually written (header, table and padding included)
	rep.FlashFits = int64(er.FlashBytes) <= nn.Profiles["m4-half"].FlashBytes
	rep.Fits = rep.RAMFits && rep.FlashFits && rep.ComputeFits
	fmt.Fprintf(stderr, "%s: %d bytes, CRC-32 %s; RAM pool %d bytes\n", er.Blob, er.FlashBytes, er.CRC32, er.RAMBytes)
	if int64(er.RAMBytes) != cost.RAMBytes {
		return nil, fmt.Errorf("export plans a %d-byte pool, the cost model %d", er.RAMBytes, cost.RAMBytes)
	}

	step(stderr, 6, "read the export back and run the whole test fold through it")
	back, err := quant.ImportFiles(er.Blob, er.Scheme)
	if err != nil {
		return nil, err
	}
	info, err := datasets.ParseModelInfo(rep.QModel, q.Meta)
	if err != nil {
		return nil, err
	}
	if err := info.Relabel(corpus); err != nil {
		return nil, err
	}
	test, _ := corpus.Split(info.TestFold)
	set, err := datasets.Load(corpus, test, datasets.Options{FrontEnd: info.FrontEnd, Window: info.Window, Cache: &datasets.Cache{Dir: cache}})
	if err != nil {
		return nil, err
	}
	set.Stats = info.Stats
	x := make([]float32, set.InputSize())
	var samples [][]int8
	for i := 0; i < set.Len(); i++ {
		set.Sample(i, 0, x)
		s := make([]int8, len(x))
		q.InputQ.QuantizeInput(s, x)
		a, bb := q.RunAll(s), back.RunAll(s)
		if !bytes.Equal(int8Bytes(a[len(a)-1]), int8Bytes(bb[len(bb)-1])) {
			return nil, fmt.Errorf("window %d: the exported model's logits differ from the in-memory one's", i)
		}
		samples = append(samples, s)
	}
	rep.RoundTripWindows = len(samples)
	fmt.Fprintf(stderr, "%d test windows: identical logits\n", len(samples))

	step(stderr, 7, "compile the C reference runtime and compare every layer with the Go engine")
	cdir := filepath.Join(out, "cref")
	if err := os.MkdirAll(cdir, 0o755); err != nil {
		return nil, err
	}
	header, err := os.ReadFile(er.Header)
	if err != nil {
		return nil, err
	}
	exe, err := cref.Build(cdir, string(header), cPrefix, ccPath, false)
	if err != nil {
		return nil, err
	}
	few := samples[:min(8, len(samples))]
	var sizes []int
	for _, l := range back.Layers {
		sizes = append(sizes, l.OutShape.Size())
	}
	got, err := cref.Run(exe, few, sizes)
	if err != nil {
		return nil, err
	}
	for s, in := range few {
		want := back.RunAll(in)
		for i := range want {
			if !bytes.Equal(int8Bytes(want[i]), int8Bytes(got[s][i])) {
				return nil, fmt.Errorf("the C reference and the Go engine differ on window %d, layer %d", s, i)
			}
		}
	}
	rep.BitExact, rep.BitExactWindows = true, len(few)
	fmt.Fprintf(stderr, "%d windows × %d layers: same bits\n", len(few), len(sizes))

	step(stderr, 8, "C front end + C network (host) on every test clip against the Go path")
	fe, _, err := deviceFrontEnd(q)
	if err != nil {
		return nil, err
	}
	rep.FrontEnd, err = features.CostOnDevice(fe.Config, fe.Frames)
	if err != nil {
		return nil, err
	}
	rep.WholePath = newWholePath(cost, v, rep.FrontEnd, nn.Profiles["m4-half"])
	rep.Fits = rep.Fits && rep.WholePath.Fits
	var recording []*features.Audio
	if rep.FrontEndTest, recording, err = checkFrontEnd(q, fe, corpus, test, set, filepath.Join(out, "cfe"), ccPath); err != nil {
		return nil, err
	}
	fc := rep.FrontEndTest
	fmt.Fprintf(stderr, "%d clips: %d/%d int8 features identical (worst %d LSB), %d/%d same predictions, logits bit-exact: %v\n",
		fc.Clips, fc.Identical, fc.Values, fc.WorstLSB, fc.SamePredictions, fc.Windows, fc.LogitsBitExact)

	step(stderr, 9, "emulated Cortex-M4 (arm-none-eabi-gcc, QEMU mps2-an386) on test windows and a recording")
	if _, err := cref.FindM4Tools(); err != nil {
		rep.OnchipNote = "skipped: " + err.Error()
		fmt.Fprintln(stderr, rep.OnchipNote)
	} else {
		rec := joinAudio(recording[:min(8, len(recording))]) // 8 s of the held-out fold
		if rep.Onchip, err = runOnchip(q, rec, 4, 160, filepath.Join(out, "m4")); err != nil {
			return nil, err
		}
		oc := rep.Onchip
		fmt.Fprintf(stderr, "logits bit-exact: %v (test inputs), %v (%d recording inputs); %.2f instructions per MAC; stack %d B\n",
			oc.LogitsBitExact, oc.RecLogitsExact, oc.RecordingInputs, oc.InstrPerMAC, oc.StackBytes)
		if !oc.LogitsBitExact || !oc.RecLogitsExact || !oc.FastLogitsBitExact || oc.FastRequantDiffer != 0 {
			return nil, fmt.Errorf("the emulated Cortex-M4's logits differ from the Go engine's")
		}
	}
	rep.Seconds = time.Since(t0).Seconds()
	return rep, nil
}

// checkFrontEnd builds the C front end and the C network for the host and
// runs every test clip, as 16-bit PCM, through both; it compares the int8
// features and predictions with the Go path (set: the test windows as the
// Go front end made them, in clip order) and returns the clips' audio.
func checkFrontEnd(q *quant.Model, fe cref.FrontEnd, corpus *datasets.Corpus, test []int, set *datasets.Set, dir, cc string) (*frontEndCheck, []*features.Audio, error) {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, nil, err
	}
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, nil, err
	}
	hdr, _, err := cref.FrontEndCHeader(fe, cPrefix)
	if err != nil {
		return nil, nil, err
	}
	exe, err := cref.BuildFrontEnd(dir, hdr, quant.CHeader(blob, doc, cPrefix), cPrefix, cc, false)
	if err != nil {
		return nil, nil, err
	}
	byClip := map[int][]int{} // clip ID → window indices of set, in order
	for i, w := range set.Windows {
		byClip[w.Clip] = append(byClip[w.Clip], i)
	}
	r := &frontEndCheck{LogitsBitExact: true}
	x := make([]float32, set.InputSize())
	var audio []*features.Audio
	for _, id := range test {
		a, err := features.ReadWAVFile(corpus.Clips[id].Path)
		if err != nil {
			return nil, nil, err
		}
		if a.SampleRateHz != fe.Config.SampleRateHz {
			return nil, nil, fmt.Errorf("%s: %d Hz, the model's front end runs at %d Hz", corpus.Clips[id].Path, a.SampleRateHz, fe.Config.SampleRateHz)
		}
		audio = append(audio, a)
		pcm := make([]int16, len(a.Samples))
		for i, v := range a.Samples {
			pcm[i] = int16(math.Max(-32768, math.Min(32767, math.Round(float64(v)*32768))))
		}
		got, err := cref.RunFrontEnd(exe, pcm, 160, fe.Config.Bands, fe.Frames, q.Layers[len(q.Layers)-1].OutShape.Size())
		if err != nil {
			return nil, nil, err
		}
		wins := byClip[id]
		if len(got.Windows) != len(wins) {
			return nil, nil, fmt.Errorf("%s: the C front end made %d inputs, the Go path %d", corpus.Clips[id].Path, len(got.Windows), len(wins))
		}
		r.Clips++
		for k, wi := range wins {
			set.Sample(wi, 0, x)
			want := make([]int8, len(x))
			q.InputQ.QuantizeInput(want, x)
			for i, v := range got.Windows[k] {
				d := int(v) - int(want[i])
				r.Values++
				if d == 0 {
					r.Identical++
				}
				r.WorstLSB = max(r.WorstLSB, d, -d)
			}
			r.Windows++
			cOut := q.RunAll(got.Windows[k])
			r.LogitsBitExact = r.LogitsBitExact && bytes.Equal(int8Bytes(cOut[len(cOut)-1]), int8Bytes(got.Logits[k]))
			goOut := q.RunAll(want)
			if argmax(got.Logits[k]) == argmax(goOut[len(goOut)-1]) {
				r.SamePredictions++
			}
		}
	}
	return r, audio, nil
}

// joinAudio concatenates clips of one rate into one recording.
func joinAudio(clips []*features.Audio) *features.Audio {
	out := &features.Audio{SampleRateHz: clips[0].SampleRateHz, Channels: 1, BitDepth: 16}
	for _, c := range clips {
		out.Samples = append(out.Samples, c.Samples...)
	}
	return out
}

func int8Bytes(v []int8) []byte {
	b := make([]byte, len(v))
	for i, x := range v {
		b[i] = byte(x)
	}
	return b
}

func printDemo(w io.Writer, r *demoReport) {
	fits := func(ok bool) string {
		if ok {
			return "fits"
		}
		return "DOES NOT FIT"
	}
	p := nn.Profiles[r.Profile]
	fmt.Fprintf(w, "\npipit demo: timber-yard monitor, %s network, held-out fold 0\n\n", r.Arch)
	tw := tabwriter.NewWriter(w, 0, 0, 3, ' ', 0)
	fmt.Fprintf(tw, "  \tfloat\tint8\t\n")
	fmt.Fprintf(tw, "  accuracy, windows\t%.3f\t%.3f\t\n", r.FloatAccuracy, r.Int8Accuracy)
	fmt.Fprintf(tw, "  accuracy, clips\t%.3f\t%.3f\t\n", r.FloatClipAcc, r.Int8ClipAcc)
	fmt.Fprintf(tw, "  \t\t\t\n  resource\tneeds\t%s budget\tverdict\n", r.Profile)
	fmt.Fprintf(tw, "  compute (50%% overlap)\t%.0f MAC/s\t%.1f M MAC/s\t%s\n", r.MACsPerSecond, p.MACsPerSecond/1e6, fits(r.ComputeFits))
	fmt.Fprintf(tw, "  flash (blob)\t%d B\t%d KiB\t%s\n", r.FlashBytes, p.FlashBytes>>10, fits(r.FlashFits))
	fmt.Fprintf(tw, "  RAM (pool)\t%d B\t%d KiB\t%s\n", r.RAMBytes, p.RAMBytes>>10, fits(r.RAMFits))
	tw.Flush()
	wp := r.WholePath
	fmt.Fprintf(w, "\n  whole path (C front end %.0f flop/s, %d B RAM, %d B tables; code %d B):\n", r.FrontEnd.FlopsPerSecond, r.FrontEnd.RAMBytes, r.FrontEnd.TableBytes, wp.CodeBytes)
	tw = tabwriter.NewWriter(w, 0, 0, 3, ' ', 0)
	fmt.Fprintf(tw, "  compute\t%.0f /s\t%.1f M/s\t%s\n", wp.ComputePerSecond, p.MACsPerSecond/1e6, fits(wp.ComputeFits))
	fmt.Fprintf(tw, "  flash\t%d B\t%d KiB\t%s\n", wp.FlashBytes, p.FlashBytes>>10, fits(wp.FlashFits))
	fmt.Fprintf(tw, "  RAM\t%d B\t%d KiB\t%s\n", wp.RAMBytes, p.RAMBytes>>10, fits(wp.RAMFits))
	tw.Flush()
	fmt.Fprintf(w, "\n  MACs per inference   %d (%d parameters)\n", r.MACs, r.Params)
	fmt.Fprintf(w, "  C reference          %s on %d test windows, every layer\n", map[bool]string{true: "bit-exact", false: "DIFFERS"}[r.BitExact], r.BitExactWindows)
	fmt.Fprintf(w, "  export round trip    identical logits on all %d test windows\n", r.RoundTripWindows)
	if fc := r.FrontEndTest; fc != nil {
		fmt.Fprintf(w, "  C front end          %d/%d int8 features as Go's (worst %d LSB), %d/%d same predictions on the test windows\n",
			fc.Identical, fc.Values, fc.WorstLSB, fc.SamePredictions, fc.Windows)
	}
	if oc := r.Onchip; oc != nil {
		fmt.Fprintf(w, "  emulated Cortex-M4   logits %s; code %d B, const %d B, static RAM %d B, stack %d B\n",
			map[bool]string{true: "bit-exact", false: "DIFFER"}[oc.LogitsBitExact && oc.RecLogitsExact], oc.Sizes.RuntimeCode+oc.Sizes.FrontEndCode, oc.ConstBytes, oc.StaticRAM, oc.StackBytes)
		fmt.Fprintf(w, "                       %.0f instructions/frame, %.0f /inference (%.2f per MAC); QEMU counts instructions, not cycles\n",
			oc.InstrPerFrame, oc.InstrPerInference, oc.InstrPerMAC)
		fmt.Fprintf(w, "                       fast kernels: logits %s, %.0f /inference (%.2f per MAC)\n",
			map[bool]string{true: "bit-exact", false: "DIFFER"}[oc.FastLogitsBitExact], oc.FastInstrPerInference, oc.FastInstrPerMAC)
	} else if r.OnchipNote != "" {
		fmt.Fprintf(w, "  emulated Cortex-M4   %s\n", r.OnchipNote)
	}
	fmt.Fprintf(w, "  files                %s, %s, %s/\n", r.Model, r.QModel, r.Export)
	fmt.Fprintf(w, "  time                 %.1f s\n", r.Seconds)
}

package main

import (
	"bytes"
	"fmt"
	"io"
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

func step(w io.Writer, n int, what string) { fmt.Fprintf(w, "\n[%d/7] %s\n", n, what) }

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
	rep.Seconds = time.Since(t0).Seconds()
	return rep, nil
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
	fmt.Fprintf(w, "\n  MACs per inference   %d (%d parameters)\n", r.MACs, r.Params)
	fmt.Fprintf(w, "  C reference          %s on %d test windows, every layer\n", map[bool]string{true: "bit-exact", false: "DIFFERS"}[r.BitExact], r.BitExactWindows)
	fmt.Fprintf(w, "  export round trip    identical logits on all %d test windows\n", r.RoundTripWindows)
	fmt.Fprintf(w, "  files                %s, %s, %s/\n", r.Model, r.QModel, r.Export)
	fmt.Fprintf(w, "  time                 %.1f s\n", r.Seconds)
}

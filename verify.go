package pipit

import (
	"bytes"
	"fmt"
	"math"
	"os"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
	"github.com/pipit-audio/pipit/quant"
	"github.com/pipit-audio/pipit/quant/cref"
)

// Int8Inputs returns every window of set quantised with q's input
// parameters, as a device's front end hands them to the network.
func Int8Inputs(q *quant.Model, set *datasets.Set) [][]int8 {
	x := make([]float32, set.InputSize())
	out := make([][]int8, set.Len())
	for i := range out {
		set.Sample(i, 0, x)
		out[i] = make([]int8, len(x))
		q.InputQ.QuantizeInput(out[i], x)
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

func logitsOf(q *quant.Model, in []int8) []int8 {
	o := q.RunAll(in)
	return o[len(o)-1]
}

// VerifyRoundTrip reads the export e back from its directory, checking
// that it is complete and one set ([OpenExport]), and checks that it
// gives the same int8 logits as q on every input; it returns the imported
// model.
func VerifyRoundTrip(q *quant.Model, e *ExportResult, inputs [][]int8) (*quant.Model, error) {
	back, err := OpenExport(e.Dir)
	if err != nil {
		return nil, err
	}
	for i, in := range inputs {
		if !bytes.Equal(int8Bytes(logitsOf(q, in)), int8Bytes(logitsOf(back, in))) {
			return nil, fmt.Errorf("pipit: input %d: the exported model's logits differ from the in-memory one's", i)
		}
	}
	return back, nil
}

// VerifyC compiles the C reference runtime with the export's header
// (compiler cc, build files in dir) and checks that it computes the same
// int8 output as the Go engine running q, at every layer, on every input.
func VerifyC(q *quant.Model, e *ExportResult, inputs [][]int8, cc, dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("pipit: %w", err)
	}
	header, err := os.ReadFile(e.Header)
	if err != nil {
		return fmt.Errorf("pipit: %w", err)
	}
	exe, err := cref.Build(dir, string(header), CPrefix, cc, false)
	if err != nil {
		return err
	}
	var sizes []int
	for _, l := range q.Layers {
		sizes = append(sizes, l.OutShape.Size())
	}
	got, err := cref.Run(exe, inputs, sizes)
	if err != nil {
		return err
	}
	for s, in := range inputs {
		want := q.RunAll(in)
		for i := range want {
			if !bytes.Equal(int8Bytes(want[i]), int8Bytes(got[s][i])) {
				return fmt.Errorf("pipit: the C reference and the Go engine differ on input %d, layer %d", s, i)
			}
		}
	}
	return nil
}

// FrontEndCheck compares the C front end (host build) with the Go front
// end on whole clips.
type FrontEndCheck struct {
	Clips           int  `json:"clips"`
	Windows         int  `json:"windows"`
	Values          int  `json:"values"`
	Identical       int  `json:"identical"`
	WorstLSB        int  `json:"worst_lsb"`
	SamePredictions int  `json:"same_predictions"` // C front end + C network vs Go front end + Go engine
	LogitsBitExact  bool `json:"logits_bit_exact"` // C network on the C features vs the Go engine on them
}

// toPCM16 rounds samples in [−1, 1) to 16-bit PCM, saturating.
func toPCM16(x []float32) []int16 {
	pcm := make([]int16, len(x))
	for i, v := range x {
		pcm[i] = int16(math.Max(-32768, math.Min(32767, math.Round(float64(v)*32768))))
	}
	return pcm
}

// VerifyCFrontEnd builds the C front end and the C network for the host
// (compiler cc, build files in dir) and runs every clip of set, as 16-bit
// PCM pushed in blocks of 160 samples, through both; it compares the int8
// features and the predictions with the Go path (set's windows as the Go
// front end made them). It returns the clips' audio too.
func VerifyCFrontEnd(q *quant.Model, set *datasets.Set, cc, dir string) (*FrontEndCheck, []*features.Audio, error) {
	fe, note, err := DeviceFrontEnd(q)
	if err != nil {
		return nil, nil, err
	}
	if note != "" {
		return nil, nil, fmt.Errorf("pipit: %s", note)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return nil, nil, fmt.Errorf("pipit: %w", err)
	}
	blob, doc, err := quant.Export(q)
	if err != nil {
		return nil, nil, err
	}
	hdr, _, err := cref.FrontEndCHeader(fe, CPrefix)
	if err != nil {
		return nil, nil, err
	}
	exe, err := cref.BuildFrontEnd(dir, hdr, quant.CHeader(blob, doc, CPrefix), CPrefix, cc, false)
	if err != nil {
		return nil, nil, err
	}
	byClip := map[int][]int{} // clip ID → window indices of set, in order
	for i, w := range set.Windows {
		byClip[w.Clip] = append(byClip[w.Clip], i)
	}
	r := &FrontEndCheck{LogitsBitExact: true}
	x := make([]float32, set.InputSize())
	var audio []*features.Audio
	for _, id := range set.Clips {
		path := set.Corpus.Clips[id].Path
		a, err := features.ReadWAVFile(path)
		if err != nil {
			return nil, nil, err
		}
		if a.SampleRateHz != fe.Config.SampleRateHz {
			return nil, nil, fmt.Errorf("pipit: %s: %d Hz, the model's front end runs at %d Hz", path, a.SampleRateHz, fe.Config.SampleRateHz)
		}
		audio = append(audio, a)
		got, err := cref.RunFrontEnd(exe, toPCM16(a.Samples), 160, fe.Config.Bands, fe.Frames, q.Layers[len(q.Layers)-1].OutShape.Size())
		if err != nil {
			return nil, nil, err
		}
		wins := byClip[id]
		if len(got.Windows) != len(wins) {
			return nil, nil, fmt.Errorf("pipit: %s: the C front end made %d inputs, the Go path %d", path, len(got.Windows), len(wins))
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
			r.LogitsBitExact = r.LogitsBitExact && bytes.Equal(int8Bytes(logitsOf(q, got.Windows[k])), int8Bytes(got.Logits[k]))
			if nn.Argmax(got.Logits[k]) == nn.Argmax(logitsOf(q, want)) {
				r.SamePredictions++
			}
		}
	}
	return r, audio, nil
}

// JoinAudio concatenates clips of one sample rate into one recording.
func JoinAudio(clips []*features.Audio) *features.Audio {
	out := &features.Audio{SampleRateHz: clips[0].SampleRateHz, Channels: 1, BitDepth: 16}
	for _, c := range clips {
		out.Samples = append(out.Samples, c.Samples...)
	}
	return out
}

package features

import (
	"fmt"
	"math"
	"os"
	"path/filepath"

	"github.com/go-audio/audio"
	"github.com/go-audio/wav"
)

// WriteWAVFile writes mono samples (full scale ±1) at rateHz as 16-bit PCM
// WAV through github.com/go-audio/wav, atomically (temporary file beside
// path, then rename). Samples are clipped to ±1 and rounded to the nearest
// integer after scaling by 32767.
func WriteWAVFile(path string, samples []float32, rateHz int) error {
	if rateHz <= 0 || rateHz > MaxWAVRateHz {
		return badConfig("write %s: sample rate %d Hz outside 1..%d", path, rateHz, MaxWAVRateHz)
	}
	f, err := os.CreateTemp(filepath.Dir(path), "."+filepath.Base(path)+".tmp*")
	if err != nil {
		return fmt.Errorf("features: %w", err)
	}
	tmp := f.Name()
	fail := func(err error) error {
		f.Close()
		os.Remove(tmp)
		return fmt.Errorf("features: writing %s: %w", path, err)
	}
	enc := wav.NewEncoder(f, rateHz, 16, 1, wavFormatPCM)
	data := make([]int, len(samples))
	for i, v := range samples {
		x := math.Max(-1, math.Min(1, float64(v)))
		data[i] = int(math.Round(x * 32767))
	}
	buf := &audio.IntBuffer{Format: &audio.Format{NumChannels: 1, SampleRate: rateHz}, Data: data, SourceBitDepth: 16}
	if err := enc.Write(buf); err != nil {
		return fail(err)
	}
	if err := enc.Close(); err != nil {
		return fail(err)
	}
	if err := f.Sync(); err != nil {
		return fail(err)
	}
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("features: writing %s: %w", path, err)
	}
	if err := os.Rename(tmp, path); err != nil {
		os.Remove(tmp)
		return fmt.Errorf("features: writing %s: %w", path, err)
	}
	return nil
}

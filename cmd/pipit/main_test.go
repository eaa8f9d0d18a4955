package main

import (
	"bytes"
	"encoding/json"
	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/quant/cref"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// run executes pipit in-process with args and returns stdout.
func run(t *testing.T, args ...string) (string, error) {
	t.Helper()
	var out, errOut bytes.Buffer
	cmd := newRootCmd(&out, &errOut)
	cmd.SetArgs(args)
	err := cmd.Execute()
	return out.String(), err
}

func TestMelspecOnEveryFixture(t *testing.T) {
	paths, _ := filepath.Glob(filepath.Join("..", "..", "testdata", "wav", "*.wav"))
	if len(paths) < 10 {
		t.Fatalf("found %d fixtures", len(paths))
	}
	dir := t.TempDir()
	for _, p := range paths {
		name := strings.TrimSuffix(filepath.Base(p), ".wav")
		t.Run(name, func(t *testing.T) {
			prefix := filepath.Join(dir, name)
			out, err := run(t, "melspec", p, "--out", prefix, "--json")
			if err != nil {
				t.Fatal(err)
			}
			var rep melspecReport
			if err := json.Unmarshal([]byte(out), &rep); err != nil {
				t.Fatalf("--json output %q: %v", out, err)
			}
			// every fixture is a 0.5-amplitude sine (mixes of several for the
			// multichannel ones): at most 20·lg 0.5 − 3.01 ≈ −9.0 dB FS A-weighted
			if rep.LevelA == nil || *rep.LevelA > -8.9 || *rep.LevelA < -40 {
				t.Errorf("A-weighted level %v dB FS implausible for a 0.5-amplitude sine", rep.LevelA)
			}
			if rep.Bands != 40 || rep.Settings.SampleRateHz != 16000 || rep.Settings.FMaxHz != 8000 {
				t.Errorf("report %+v: want 40 bands at 16 kHz to 8 kHz", rep)
			}
			csv, err := os.ReadFile(prefix + ".csv")
			if err != nil {
				t.Fatal(err)
			}
			lines := strings.Split(strings.TrimSpace(string(csv)), "\n")
			if len(lines) != rep.Frames {
				t.Fatalf("CSV has %d rows, report says %d frames", len(lines), rep.Frames)
			}
			for _, l := range lines {
				cols := strings.Split(l, ",")
				if len(cols) != 40 {
					t.Fatalf("CSV row has %d columns, want 40", len(cols))
				}
				if _, err := strconv.ParseFloat(cols[0], 64); err != nil {
					t.Fatalf("CSV value %q: %v", cols[0], err)
				}
			}
			png, err := os.ReadFile(prefix + ".png")
			if err != nil || !bytes.HasPrefix(png, []byte("\x89PNG\r\n\x1a\n")) {
				t.Fatalf("PNG missing or not a PNG (err %v)", err)
			}
		})
	}
}

func TestMelspecFlagsAndErrors(t *testing.T) {
	dir := t.TempDir()
	wav := filepath.Join("..", "..", "testdata", "wav", "pcm_s16_16k.wav")
	out, err := run(t, "melspec", wav, "--out", filepath.Join(dir, "x"), "--json", "--rate", "8000", "--bands", "20", "--mel", "slaney", "--log", "ln", "--window", "256", "--hop", "128")
	if err != nil {
		t.Fatal(err)
	}
	var rep melspecReport
	json.Unmarshal([]byte(out), &rep)
	if rep.Settings.FMaxHz != 4000 || rep.Bands != 20 || rep.Settings.MelScale != "slaney" || rep.Settings.Log != "ln" {
		t.Errorf("flags not applied: %+v", rep.Settings)
	}
	// A bad file is reported by name and leaves an existing output alone.
	bad := filepath.Join(dir, "bad.wav")
	os.WriteFile(bad, []byte("RIFF\x04\x00\x00\x00WAVE"), 0o644)
	good := filepath.Join(dir, "keep")
	os.WriteFile(good+".csv", []byte("old"), 0o644)
	if _, err := run(t, "melspec", bad, "--out", good); err == nil || !strings.Contains(err.Error(), "bad.wav") {
		t.Errorf("bad WAV: error %v, want one naming bad.wav", err)
	}
	if b, _ := os.ReadFile(good + ".csv"); string(b) != "old" {
		t.Errorf("existing output overwritten after an error: %q", b)
	}
	if _, err := run(t, "melspec", wav, "--fmax", "12000"); err == nil || !strings.Contains(err.Error(), "Nyquist") {
		t.Errorf("fmax above Nyquist: error %v", err)
	}
}

func TestDemoRuns(t *testing.T) {
	if testing.Short() {
		t.Skip("runs the whole pipeline; skipped with -short")
	}
	t.Chdir(t.TempDir()) // a relative --out, as the README's command uses
	out, err := run(t, "demo", "--out", "demo-out", "--epochs", "3", "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep demoReport
	if err := json.Unmarshal([]byte(out), &rep); err != nil {
		t.Fatal(err)
	}
	if !rep.BitExact || rep.BitExactWindows == 0 || rep.RoundTripWindows != 64 || rep.MACs != 475072 || rep.RAMBytes != 12480 || rep.FlashBytes == 0 || !rep.Fits {
		t.Errorf("demo report %+v", rep)
	}
	// the whole path and the C front end on every test clip
	if fc := rep.FrontEndTest; fc == nil || fc.Windows != 64 || fc.Values != 64*40*61 || float64(fc.Identical) < 0.999*float64(fc.Values) || fc.WorstLSB > 1 || fc.SamePredictions != fc.Windows || !fc.LogitsBitExact {
		t.Errorf("C front end on the test fold: %+v", rep.FrontEndTest)
	}
	if wp := rep.WholePath; wp.ComputePerSecond != rep.MACsPerSecond+rep.FrontEnd.FlopsPerSecond || !wp.Fits {
		t.Errorf("whole path %+v", wp)
	}
	if _, err := cref.FindM4Tools(); err != nil {
		t.Logf("emulated Cortex-M4 not checked: %v", err)
	} else {
		oc := rep.Onchip
		if oc == nil || !oc.LogitsBitExact || !oc.RecLogitsExact || !oc.FastLogitsBitExact || oc.FastRequantChecked == 0 || oc.FastRequantDiffer != 0 ||
			oc.FastInstrPerMAC <= 0 || oc.FastInstrPerMAC >= oc.InstrPerMAC || oc.SamePredictions != oc.RecordingInputs || oc.FeaturesWorstLSB > 1 ||
			oc.ConstBytes != oc.ConstModel || oc.StaticRAM != oc.StaticRAMModel || oc.StackBytes <= 0 || oc.InstrPerMAC <= 0 {
			t.Errorf("emulated run: %+v", oc)
		}
		// the command on its own, on the demo's model and one held-out clip
		clips, _ := filepath.Glob(filepath.Join(rep.Corpus, "*", "*.wav"))
		out, err := run(t, "onchip", "--model", rep.QModel, "--wav", clips[0], "--json")
		if err != nil {
			t.Fatal(err)
		}
		var o onchipReport
		if err := json.Unmarshal([]byte(out), &o); err != nil || !o.LogitsBitExact || !o.RecLogitsExact || o.RecordingInputs != 1 {
			t.Errorf("pipit onchip: %v %+v", err, o)
		}
	}
	for _, f := range []string{"model.blob", "model.scheme.json", "pipit_net.h", "pipit_rt.c", "pipit_rt.h", "pipit_net_fe.h", "pipit_fe.h", "pipit_fe.c"} {
		if _, err := os.Stat(filepath.Join(rep.Export, f)); err != nil {
			t.Errorf("export lacks %s", f)
		}
	}
}

func TestBudget(t *testing.T) {
	for _, arch := range []string{"pooled", "strided", "separable"} {
		out, err := run(t, "budget", "--arch", arch, "--json")
		if err != nil {
			t.Fatal(err)
		}
		var rep map[string]any
		if err := json.Unmarshal([]byte(out), &rep); err != nil {
			t.Fatal(err)
		}
		for _, k := range []string{"macs", "params", "flash_bytes", "ram_bytes", "macs_per_second", "fits"} {
			if _, ok := rep[k]; !ok {
				t.Errorf("%s: JSON lacks %q", arch, k)
			}
		}
	}
	// A spec file: 8x8x1 → conv 4 (3x3 valid: 6x6x4) → dense 2.
	// MACs: 6·6·4·9 = 1296 + 144·2 = 288 → 1584. At 1 s, 50 % overlap:
	// 3168 MAC/s.
	dir := t.TempDir()
	p := filepath.Join(dir, "tiny.spec")
	os.WriteFile(p, []byte("input shape=8x8x1\nconv out=4 kernel=3\nrelu\ndense out=2\n"), 0o644)
	out, err := run(t, "budget", "--arch", p, "--json")
	if err != nil {
		t.Fatal(err)
	}
	var rep budgetReport
	json.Unmarshal([]byte(out), &rep)
	if rep.MACs != 1584 || rep.MACsPerSecond != 3168 || !rep.Fits {
		t.Errorf("spec file budget: %d MACs, %g MAC/s, fits %v; want 1584, 3168, true", rep.MACs, rep.MACsPerSecond, rep.Fits)
	}
	text, err := run(t, "budget", "--arch", "pooled")
	if err != nil || !strings.Contains(text, "DOES NOT FIT") || !strings.Contains(text, "RAM peak") {
		t.Errorf("pooled text report (err %v) should show the compute overrun and the RAM peak:\n%s", err, text)
	}
	if _, err := run(t, "budget", "--arch", "nosuch"); err == nil || !strings.Contains(err.Error(), "neither") {
		t.Errorf("unknown arch: error %v", err)
	}
	os.WriteFile(p, []byte("conv out=4\n"), 0o644)
	if _, err := run(t, "budget", "--arch", p); err == nil || !strings.Contains(err.Error(), "tiny.spec") {
		t.Errorf("bad spec: error %v, want one naming the file", err)
	}
}

// TestMelspecSilence: digital silence has no level; --json must say null
// (JSON has no −Inf) and the command must succeed with both outputs.
func TestMelspecSilence(t *testing.T) {
	dir := t.TempDir()
	wav := filepath.Join(dir, "quiet-yard.wav")
	if err := features.WriteWAVFile(wav, make([]float32, 16000), 16000); err != nil {
		t.Fatal(err)
	}
	out, err := run(t, "melspec", wav, "--out", filepath.Join(dir, "q"), "--json")
	if err != nil {
		t.Fatalf("melspec on silence: %v", err)
	}
	var raw map[string]any
	if err := json.Unmarshal([]byte(out), &raw); err != nil {
		t.Fatalf("--json output %q: %v", out, err)
	}
	if v, ok := raw["level_a_dbfs"]; !ok || v != nil {
		t.Errorf("level_a_dbfs = %v (present %v), want null", v, ok)
	}
	for _, p := range []string{"q.csv", "q.png"} {
		if _, err := os.Stat(filepath.Join(dir, p)); err != nil {
			t.Error(err)
		}
	}
}

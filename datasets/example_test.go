package datasets_test

import (
	"fmt"
	"os"

	"github.com/pipit-audio/pipit/datasets"
	"github.com/pipit-audio/pipit/features"
)

// Generate a small synthetic corpus, as the demo does, and look at its folds.
func ExampleSynthesize() {
	dir, _ := os.MkdirTemp("", "yard")
	defer os.RemoveAll(dir)
	c, err := datasets.Synthesize(dir, datasets.SynthConfig{ClipsPerClass: 5, Folds: 5, Seed: 1}, nil)
	if err != nil {
		panic(err)
	}
	in0, rest := c.Split(0)
	fmt.Println(len(c.Classes), "classes,", len(c.Clips), "clips;", len(in0), "in fold 0,", len(rest), "elsewhere")
	// Output:
	// 8 classes, 40 clips; 8 in fold 0, 32 elsewhere
}

// Assign folds so that spans of one source recording stay together.
func ExampleCorpus_AssignFolds() {
	manifest := "path,label,start,end\nlong.wav,saw,0,1\nlong.wav,saw,1,2\nlong.wav,saw,2,3\nb1.wav,bird,,\nb2.wav,bird,,\nb3.wav,bird,,\n"
	c, err := datasets.ParseManifest("m.csv", []byte(manifest), "/data", "")
	if err != nil {
		panic(err)
	}
	c.AssignFolds(2, 7)
	fmt.Println("spans of long.wav share a fold:", c.Clips[0].Fold == c.Clips[1].Fold && c.Clips[1].Fold == c.Clips[2].Fold)
	// Output:
	// spans of long.wav share a fold: true
}

// Count the model windows of a 5 s clip at 50 % overlap.
func ExampleWindowConfig_Starts() {
	fe := features.DefaultConfig()
	w := datasets.WindowConfig{Frames: 61, Overlap: 0.5, Pad: datasets.PadZeros}
	frames := fe.Frames(5 * fe.SampleRateHz) // 1 + (80000−512)/256 = 311
	fmt.Println(frames, "frames →", len(w.Starts(frames)), "windows, every", w.HopFrames(), "frames")
	// Output:
	// 311 frames → 9 windows, every 31 frames
}

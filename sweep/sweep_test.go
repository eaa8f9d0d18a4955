package sweep

import (
	"bytes"
	"context"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"strings"
	"sync"
	"sync/atomic"
	"testing"

	"github.com/pipit-audio/pipit/features"
	"github.com/pipit-audio/pipit/nn"
)

const testGrid = `pipit-grid 1
# twelve points: 2 band counts × 2 hops × 3 networks
bands 40 20
hop   256 512     # samples
arch  separable strided
width 0.5 1
blocks 2          # separable only: merged away for strided
epochs 9
`

var testClasses = []string{"a", "b", "c", "d"}

func testPlan(t *testing.T, grid string, p nn.Profile) (string, *Plan) {
	t.Helper()
	g, err := ParseGrid("test.grid", strings.NewReader(grid))
	if err != nil {
		t.Fatal(err)
	}
	plan, err := Expand(g, PlanInput{Data: "corpus.csv", Classes: testClasses, Folds: 3, Profile: p, KeepUnfit: true})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := plan.Write(dir); err != nil {
		t.Fatal(err)
	}
	return dir, plan
}

func TestParseGrid(t *testing.T) {
	g, err := ParseGrid("x", strings.NewReader(testGrid))
	if err != nil {
		t.Fatal(err)
	}
	if fmt.Sprint(g.Bands, g.Hop, g.Arch, g.Width, g.Blocks, g.Settings.Epochs) != "[40 20] [256 512] [separable strided] [0.5 1] [2] 9" {
		t.Errorf("parsed %+v", g)
	}
	if g.Size() != 16 {
		t.Errorf("size %d, want 2·2·2·2 = 16", g.Size())
	}
	for _, c := range []struct{ text, want string }{
		{"", "empty grid file"},
		{"bands 40\n", `x:1: a grid file starts with the line "pipit-grid 1"`},
		{"pipit-grid 2\n", "x:1:"},
		{"pipit-grid 1\nband 40\n", "x:2: band 40: unknown key"},
		{"pipit-grid 1\nbands 40\n\nbands 20\n", `x:4: "bands" given again (first on line 2)`},
		{"pipit-grid 1\nbands\n", `x:2: "bands" has no values`},
		{"pipit-grid 1\nbands 40 forty\n", `"forty" is not a whole number`},
		{"pipit-grid 1\nbands 40 40\n", "listed twice"},
		{"pipit-grid 1\nwidth 0\n", "(0, 8]"},
		{"pipit-grid 1\narch lstm\n", `"lstm": want one of`},
		{"pipit-grid 1\nepochs 3 4\n", "a setting takes one value"},
		{"pipit-grid 1\nfmax 9k\n", "neither nyquist nor a frequency"},
		{"pipit-grid 1\naugment maybe\n", "want on or off"},
	} {
		_, err := ParseGrid("x", strings.NewReader(c.text))
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: error %v, want one containing %q", c.text, err, c.want)
		}
	}
}

func FuzzParseGrid(f *testing.F) {
	f.Add(testGrid)
	f.Add("pipit-grid 1\nfmax nyquist 4000\nscheme pow2 per-tensor\nmethod mse\nseconds 0.5\nseed 7\naugment off\n")
	f.Add("pipit-grid 1\n#\n\t\n")
	f.Fuzz(func(t *testing.T, s string) {
		g, err := ParseGrid("fuzz", strings.NewReader(s))
		if err != nil {
			return
		}
		if g.Size() < 1 {
			t.Fatalf("size %d", g.Size())
		}
	})
}

func TestExpandPrunesByResource(t *testing.T) {
	g, _ := ParseGrid("x", strings.NewReader(testGrid))
	// Strided ×1 on 40 bands at hop 256 is the most expensive point; put
	// the compute budget between it and the rest.
	plan, err := Expand(g, PlanInput{Data: "c.csv", Classes: testClasses, Folds: 3, Profile: nn.Profiles["m4-half"]})
	if err != nil {
		t.Fatal(err)
	}
	if plan.GridPoints != 16 {
		t.Errorf("%d points, want 16 (blocks do not multiply strided)", plan.GridPoints)
	}
	// Each job's cost is the sum, computed here from the cost models
	// directly, of the network (nn.Cost, int8) and the front end.
	for _, j := range plan.Jobs {
		net, err := nn.FromSpec(j.NetSpec, nn.Shape{}, 1)
		if err != nil {
			t.Fatal(err)
		}
		c := nn.Cost(net, 1)
		net.Close()
		fe, err := features.CostOnDevice(j.FrontEnd, j.InputFrames)
		if err != nil {
			t.Fatal(err)
		}
		want := float64(c.MACs)*2 + fe.FlopsPerSecond // 1 s windows at overlap 0.5: 2 inferences/s
		if math.Abs(j.Cost.ComputePerSecond-want) > 1e-6*want || !j.Cost.Fits {
			t.Errorf("%s: compute %g, want %g; fits %v", j.Label, j.Cost.ComputePerSecond, want, j.Cost.Fits)
		}
		if j.FrontEnd.Bands != net.Input.H || j.InputFrames != j.FrontEnd.Frames(16000) {
			t.Errorf("%s: input %v for %d bands", j.Label, net.Input, j.FrontEnd.Bands)
		}
	}
	if len(plan.Jobs)+len(plan.Pruned) != 16 || len(plan.Pruned) == 0 || plan.PrunedBy["compute"] != len(plan.Pruned) {
		t.Errorf("%d jobs, pruned %+v by %v", len(plan.Jobs), plan.Pruned, plan.PrunedBy)
	}
	// A profile with almost no RAM prunes everything, by RAM.
	tiny := nn.Profile{Name: "tiny", RAMBytes: 1024, FlashBytes: 1 << 30, MACsPerSecond: 1e12}
	plan, _ = Expand(g, PlanInput{Data: "c.csv", Classes: testClasses, Folds: 3, Profile: tiny})
	if len(plan.Jobs) != 0 || plan.PrunedBy["ram"] != 16 || len(plan.PrunedBy) != 1 {
		t.Errorf("tiny RAM: %d jobs, pruned by %v", len(plan.Jobs), plan.PrunedBy)
	}
	if s := plan.Summary(); !strings.Contains(s, "16 pruned") || !strings.Contains(s, "16 over ram") {
		t.Errorf("summary %q", s)
	}
	// An fmax above Nyquist is invalid, not a job.
	g2, _ := ParseGrid("x", strings.NewReader("pipit-grid 1\nrate 16000 8000\nfmax 6000\n"))
	plan, _ = Expand(g2, PlanInput{Data: "c.csv", Classes: testClasses, Folds: 3, Profile: nn.Profiles["m4-half"]})
	if len(plan.Jobs) != 1 || plan.PrunedBy["invalid"] != 1 || !strings.Contains(plan.Pruned[0].Reason[0], "Nyquist") {
		t.Errorf("fmax 6000 at 8 kHz: %d jobs, pruned %+v", len(plan.Jobs), plan.Pruned)
	}
}

// fakeTrain gives accuracies that depend only on the job and fold, so
// results can be compared across runs and orders.
func fakeTrain(calls *atomic.Int64) TrainFunc {
	return func(_ context.Context, j *Job, fold, epochs int, _ string, _ io.Writer) (*FoldResult, error) {
		calls.Add(1)
		a := 0.5 + 0.04*float64(j.Index%7) + 0.01*float64(fold) + 0.001*float64(epochs)
		return &FoldResult{FloatAccuracy: a, Int8Accuracy: a - 0.005*float64(j.Index%3), Epochs: epochs}, nil
	}
}

func reportBytes(t *testing.T, dir string) []byte {
	t.Helper()
	r, err := Merge(dir)
	if err != nil {
		t.Fatal(err)
	}
	var b bytes.Buffer
	if err := r.WriteJSON(&b); err != nil {
		t.Fatal(err)
	}
	if err := r.WriteTable(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

func TestRunResumesAfterKill(t *testing.T) {
	dir, plan := testPlan(t, testGrid, nn.Profiles["m4-half"])
	n := len(plan.Jobs)
	var calls atomic.Int64
	train := fakeTrain(&calls)
	// "Kill" the run half-way: the context is cancelled once half the jobs
	// have started; the job in flight stops without a result.
	ctx, cancel := context.WithCancel(context.Background())
	var started atomic.Int64
	_, err := Run(ctx, dir, RunOptions{Parallel: 2, Train: func(ctx context.Context, j *Job, fold, epochs int, w string, l io.Writer) (*FoldResult, error) {
		if fold == 0 && started.Add(1) == int64(n/2) {
			cancel()
		}
		return train(ctx, j, fold, epochs, w, l)
	}})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("cancelled run: %v", err)
	}
	var done []int
	for i := 0; i < n; i++ {
		if _, err := os.Stat(ResultPath(dir, i)); err == nil {
			done = append(done, i)
		}
	}
	if len(done) == 0 || len(done) >= n {
		t.Fatalf("%d of %d jobs finished before the kill", len(done), n)
	}
	// A half-written result (as a crash during a non-atomic write would
	// leave) must be redone.
	half := done[0]
	b, _ := os.ReadFile(ResultPath(dir, half))
	os.WriteFile(ResultPath(dir, half), b[:len(b)/2], 0o644)
	calls.Store(0)
	var ran sync.Map
	s, err := Run(context.Background(), dir, RunOptions{Parallel: 2, Train: func(ctx context.Context, j *Job, fold, epochs int, w string, l io.Writer) (*FoldResult, error) {
		ran.Store(j.Index, true)
		return train(ctx, j, fold, epochs, w, l)
	}})
	if err != nil {
		t.Fatal(err)
	}
	want := n - len(done) + 1
	if s.Ran != want || s.Skipped != len(done)-1 || len(s.Redone) != 1 || int(calls.Load()) != 3*want {
		t.Errorf("re-run: ran %d, skipped %d, redone %v, %d fold calls; want %d ran, %d skipped, 1 redone", s.Ran, s.Skipped, s.Redone, calls.Load(), want, len(done)-1)
	}
	for _, i := range done[1:] {
		if _, again := ran.Load(i); again {
			t.Errorf("job %d had a result and ran again", i)
		}
	}
	// A third run does nothing.
	calls.Store(0)
	s, err = Run(context.Background(), dir, RunOptions{Train: train})
	if err != nil || s.Ran != 0 || calls.Load() != 0 {
		t.Errorf("third run: %+v, %v", s, err)
	}
	// A result for another version of the spec is stale and redone.
	j, _, _ := ReadJob(dir, 0)
	j.Method = "mse"
	jb, _ := os.ReadFile(JobPath(dir, 0))
	os.WriteFile(JobPath(dir, 0), bytes.Replace(jb, []byte(`"method": "auto"`), []byte(`"method": "mse"`), 1), 0o644)
	s, err = Run(context.Background(), dir, RunOptions{Train: train})
	if err != nil || s.Ran != 1 || len(s.Redone) != 1 || !strings.Contains(s.Redone[0], "another version") {
		t.Errorf("stale result: %+v, %v", s, err)
	}
}

func TestReportSameBytesWhateverOrder(t *testing.T) {
	var calls atomic.Int64
	dirA, plan := testPlan(t, testGrid, nn.Profiles["m4-half"])
	dirB, _ := testPlan(t, testGrid, nn.Profiles["m4-half"])
	n := len(plan.Jobs)
	for i := 0; i < n; i++ {
		if _, err := Run(context.Background(), dirA, RunOptions{Train: fakeTrain(&calls), Jobs: []int{i}}); err != nil {
			t.Fatal(err)
		}
		if _, err := Run(context.Background(), dirB, RunOptions{Train: fakeTrain(&calls), Jobs: []int{n - 1 - i}}); err != nil {
			t.Fatal(err)
		}
	}
	a, b := reportBytes(t, dirA), reportBytes(t, dirB)
	if !bytes.Equal(a, b) {
		t.Fatalf("reports differ between job orders:\n%s\n----\n%s", a, b)
	}
	// And with four at a time.
	dirC, _ := testPlan(t, testGrid, nn.Profiles["m4-half"])
	if _, err := Run(context.Background(), dirC, RunOptions{Train: fakeTrain(&calls), Parallel: 4}); err != nil {
		t.Fatal(err)
	}
	if c := reportBytes(t, dirC); !bytes.Equal(a, c) {
		t.Fatalf("parallel report differs")
	}
	r, _ := Merge(dirA)
	if len(r.Front) == 0 || len(r.Missing) != 0 {
		t.Errorf("front %v, missing %v", r.Front, r.Missing)
	}
	var png bytes.Buffer
	if err := r.Figure().WritePNG(&png); err != nil || !bytes.HasPrefix(png.Bytes(), []byte("\x89PNG")) {
		t.Errorf("figure: %v", err)
	}
}

func TestParetoFront(t *testing.T) {
	// Worked by hand: (compute, accuracy) points; 1 is dominated by 0
	// (cheaper and as accurate), 3 by 2 (same compute, less accurate), 5
	// is cheapest but does not fit, so 4 stays; 6 equals 2 and stays.
	c := []float64{1, 2, 3, 3, 0.5, 0.1, 3}
	a := []float64{0.8, 0.8, 0.9, 0.85, 0.7, 0.99, 0.9}
	ok := []bool{true, true, true, true, true, false, true}
	if got := fmt.Sprint(ParetoFront(c, a, ok)); got != "[0 2 4 6]" {
		t.Errorf("front %s, want [0 2 4 6]", got)
	}
}

func TestHalvingSaving(t *testing.T) {
	grid := "pipit-grid 1\nbands 40 20 32\nwidth 0.5 1\nepochs 9\n"
	dir, plan := testPlan(t, grid, nn.Profiles["m4-half"])
	if len(plan.Jobs) != 6 {
		t.Fatalf("%d jobs, want 6", len(plan.Jobs))
	}
	var calls atomic.Int64
	s, err := Run(context.Background(), dir, RunOptions{Train: fakeTrain(&calls), Halving: 3})
	if err != nil {
		t.Fatal(err)
	}
	// Rung 0: 6 jobs × 3 folds × 3 epochs; rung 1: the best 2 × 3 × 9.
	// Full grid: 6 × 3 × 9 = 162; budget 54 + 54 = 108, a third saved.
	// fakeTrain ranks jobs by index mod 7, then int8 loss by index mod 3:
	// int8 means 0.5+0.04i+0.01−0.005(i mod 3) → jobs 5 and 4 are best.
	if s.EpochBudget != 108 || s.FullEpochBudget != 162 || fmt.Sprint(s.Promoted) != "[4 5]" || calls.Load() != 6*3+2*3 {
		t.Errorf("halving: budget %d of %d, promoted %v, %d fold calls", s.EpochBudget, s.FullEpochBudget, s.Promoted, calls.Load())
	}
	r, err := Merge(dir)
	if err != nil {
		t.Fatal(err)
	}
	if r.Halving == nil || math.Abs(r.Halving.Saving-1.0/3) > 1e-12 || r.Rows[5].Epochs != 9 || r.Rows[0].Epochs != 3 {
		t.Errorf("report halving %+v, epochs %d %d", r.Halving, r.Rows[5].Epochs, r.Rows[0].Epochs)
	}
	calls.Store(0)
	if _, err := Run(context.Background(), dir, RunOptions{Train: fakeTrain(&calls), Halving: 3}); err != nil || calls.Load() != 0 {
		t.Errorf("re-run of a finished halving: %d calls, %v", calls.Load(), err)
	}
	// A full-grid run afterwards redoes the jobs that stopped at rung 0.
	s, err = Run(context.Background(), dir, RunOptions{Train: fakeTrain(&calls)})
	if err != nil || s.Ran != 4 || s.Skipped != 2 {
		t.Errorf("full run after halving: %+v, %v", s, err)
	}
}

func TestIndexFromEnv(t *testing.T) {
	t.Setenv("PIPIT_TEST_INDEX", "7")
	if i, err := IndexFromEnv("PIPIT_TEST_INDEX"); err != nil || i != 7 {
		t.Errorf("got %d, %v", i, err)
	}
	t.Setenv("PIPIT_TEST_INDEX", "-1")
	if _, err := IndexFromEnv("PIPIT_TEST_INDEX"); err == nil {
		t.Error("-1: want an error")
	}
	if _, err := IndexFromEnv("PIPIT_TEST_UNSET_VARIABLE"); err == nil || !strings.Contains(err.Error(), "not set") {
		t.Errorf("unset: %v", err)
	}
}

func TestPlanNotOverwritten(t *testing.T) {
	dir, plan := testPlan(t, testGrid, nn.Profiles["m4-half"])
	if err := plan.Write(dir); err == nil || !strings.Contains(err.Error(), "already holds a plan") {
		t.Errorf("second write: %v", err)
	}
}

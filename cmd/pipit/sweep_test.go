package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
	"testing"
	"time"

	"github.com/pipit-audio/pipit/sweep"
)

// TestSweepChild runs pipit with the arguments in PIPIT_SWEEP_CHILD
// (separated by the unit separator U+001F) when set, so that the kill test below can run the CLI as
// a process of its own and kill it; otherwise it does nothing.
func TestSweepChild(t *testing.T) {
	args := os.Getenv("PIPIT_SWEEP_CHILD")
	if args == "" {
		t.Skip("helper process for TestSweepKilledAndResumed")
	}
	var out bytes.Buffer
	cmd := newRootCmd(&out, os.Stderr)
	cmd.SetArgs(strings.Split(args, "\x1f"))
	if err := cmd.Execute(); err != nil {
		t.Fatal(err)
	}
}

const sweepTestGrid = `pipit-grid 1
bands 40 20
hop 256 512
width 0.5 1
epochs 1
folds 3
`

// TestSweepKilledAndResumed is the bar on real training: a sweep
// killed (SIGKILL) half-way and re-run trains only the jobs without a
// result, leaves finished results untouched, and its report equals, byte
// for byte, that of an uninterrupted run with --parallel 2. Its job costs
// equal pipit budget's whole path.
func TestSweepKilledAndResumed(t *testing.T) {
	if testing.Short() {
		t.Skip("trains 8 small networks × 3 folds; skipped with -short")
	}
	dir := t.TempDir()
	corpus := filepath.Join(dir, "corpus")
	if _, err := run(t, "synth", "--out", corpus, "--clips-per-class", "6", "--folds", "3"); err != nil {
		t.Fatal(err)
	}
	grid := filepath.Join(dir, "grid.txt")
	os.WriteFile(grid, []byte(sweepTestGrid), 0o644)
	manifest := filepath.Join(corpus, "manifest.csv")
	cache := filepath.Join(dir, "cache")
	killed, clean := filepath.Join(dir, "killed"), filepath.Join(dir, "clean")
	for _, d := range []string{killed, clean} {
		out, err := run(t, "sweep", "plan", "--data", manifest, "--grid", grid, "--out", d)
		if err != nil {
			t.Fatal(err)
		}
		if !strings.HasPrefix(out, "8 grid points → 8 jobs; 0 pruned") {
			t.Fatalf("plan: %s", out)
		}
	}
	if _, err := run(t, "sweep", "plan", "--data", manifest, "--grid", grid, "--out", clean); err == nil {
		t.Error("planning into a sweep directory again: want an error")
	}

	// Whole-path cost of job 0 (40 bands, hop 256, width 0.5) as pipit
	// budget computes it for the same network.
	j, _, err := sweep.ReadJob(killed, 0)
	if err != nil {
		t.Fatal(err)
	}
	spec := filepath.Join(dir, "job0.spec")
	os.WriteFile(spec, []byte(j.NetSpec), 0o644)
	out, err := run(t, "budget", "--arch", spec, "--json", "--bands", "40", "--hop", "256")
	if err != nil {
		t.Fatal(err)
	}
	var b budgetReport
	if err := json.Unmarshal([]byte(out), &b); err != nil {
		t.Fatal(err)
	}
	if b.WholePath.ComputePerSecond != j.Cost.ComputePerSecond || b.WholePath.RAMBytes != j.Cost.RAMBytes || b.WholePath.FlashBytes != j.Cost.FlashBytes {
		t.Errorf("job 0 cost %+v, pipit budget %+v", j.Cost, b.WholePath)
	}

	// Start the killed sweep as its own process and kill it once two
	// results exist.
	child := exec.Command(os.Args[0], "-test.run=^TestSweepChild$")
	child.Env = append(os.Environ(), "PIPIT_SWEEP_CHILD="+strings.Join([]string{"sweep", "run", killed, "--cache", cache}, "\x1f"))
	if err := child.Start(); err != nil {
		t.Fatal(err)
	}
	results := func(d string) []string {
		m, _ := filepath.Glob(filepath.Join(d, "jobs", "job-*.result.json"))
		return m
	}
	deadline := time.Now().Add(3 * time.Minute)
	for len(results(killed)) < 2 && time.Now().Before(deadline) {
		time.Sleep(50 * time.Millisecond)
	}
	child.Process.Signal(syscall.SIGKILL)
	child.Wait()
	before := map[string][]byte{}
	for _, p := range results(killed) {
		before[p], _ = os.ReadFile(p)
	}
	if len(before) < 2 || len(before) >= 8 {
		t.Fatalf("%d of 8 results when killed; want a run killed half-way", len(before))
	}
	out, err = run(t, "sweep", "run", killed, "--cache", cache)
	if err != nil {
		t.Fatal(err)
	}
	want := "8 jobs: " + itoa(8-len(before)) + " ran, " + itoa(len(before)) + " already done, 0 redone, 0 failed"
	if !strings.HasPrefix(out, want) {
		t.Errorf("re-run: %q, want %q", out, want)
	}
	for p, b := range before {
		if a, _ := os.ReadFile(p); !bytes.Equal(a, b) {
			t.Errorf("%s was rewritten by the re-run", p)
		}
	}
	if _, err := run(t, "sweep", "run", clean, "--cache", cache, "--parallel", "2"); err != nil {
		t.Fatal(err)
	}
	ra, err := run(t, "sweep", "report", killed, "--json")
	if err != nil {
		t.Fatal(err)
	}
	rb, err := run(t, "sweep", "report", clean, "--json")
	if err != nil {
		t.Fatal(err)
	}
	if ra != rb {
		t.Errorf("report of the killed and resumed sweep differs from the clean --parallel 2 one:\n%s\n----\n%s", ra, rb)
	}
	if _, err := os.Stat(filepath.Join(clean, "front.png")); err != nil {
		t.Error(err)
	}
	var rep sweep.Report
	if err := json.Unmarshal([]byte(ra), &rep); err != nil {
		t.Fatal(err)
	}
	if len(rep.Missing) != 0 || len(rep.Front) == 0 {
		t.Errorf("missing %v, front %v", rep.Missing, rep.Front)
	}
	if _, err := run(t, "sweep", "run", clean, "--job", "8"); err == nil || !strings.Contains(err.Error(), "jobs 0..7") {
		t.Errorf("--job 8: %v", err)
	}
	t.Setenv("SLURM_ARRAY_TASK_ID", "3")
	if out, err := run(t, "sweep", "run", clean, "--index-from-env", "SLURM_ARRAY_TASK_ID"); err != nil || !strings.HasPrefix(out, "1 jobs: 0 ran, 1 already done") {
		t.Errorf("array task 3 of a finished sweep: %q, %v", out, err)
	}
}

func itoa(n int) string { return strconv.Itoa(n) }

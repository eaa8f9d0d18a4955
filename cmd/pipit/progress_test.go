package main

import (
	"bytes"
	"fmt"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

func TestProgressPlainWhenNotATerminal(t *testing.T) {
	var buf bytes.Buffer
	task := newTask(&buf, "epoch 1/2")
	for i := 1; i <= 500; i++ {
		task.step(i, 500, "batches", "train loss 0.5")
	}
	if buf.Len() != 0 {
		t.Errorf("a short task printed %q before finishing; want nothing until plainEvery has passed", buf.String())
	}
	task.last = time.Now().Add(-plainEvery - time.Second) // as if 11 s had passed
	task.step(250, 500, "batches", "train loss 0.5")
	task.step(251, 500, "batches", "train loss 0.5") // too soon after the last line
	task.finish("done")
	out := buf.String()
	if strings.ContainsAny(out, "\r\x1b") {
		t.Errorf("non-terminal output has carriage returns or escapes: %q", out)
	}
	lines := strings.Split(strings.TrimSuffix(out, "\n"), "\n")
	if len(lines) != 2 || !strings.HasPrefix(lines[0], "epoch 1/2: 250 of 500 batches (50 %), train loss 0.5, ") ||
		!strings.HasSuffix(lines[0], " to go") || !strings.HasPrefix(lines[1], "epoch 1/2: done (") {
		t.Errorf("plain lines %q", lines)
	}
}

func TestErrorNeverSharesALiveStatusLine(t *testing.T) {
	var buf bytes.Buffer
	con := &console{w: &buf, tty: true}
	task := newTask(con, "load train")
	task.step(3, 10, "clips", "")
	if out := buf.String(); !strings.HasPrefix(out, "\rload train: 3 of 10 clips (30 %)") || strings.Contains(out, "\n") {
		t.Fatalf("terminal status %q, want one redrawn line without a newline", out)
	}
	fmt.Fprintln(con, "pipit: bad.wav: not a WAV file")
	if out := buf.String(); !strings.HasSuffix(out, "\x1b[K\npipit: bad.wav: not a WAV file\n") {
		t.Errorf("error after a live status: %q, want it on a line of its own", out)
	}
	buf.Reset()
	task.step(10, 10, "clips", "") // the last step is always drawn
	task.finish("10 clips → 20 windows")
	if out := buf.String(); !strings.Contains(out, "\r\x1b[Kload train: 10 clips → 20 windows (") || strings.Count(out, "\n") != 1 {
		t.Errorf("closing line %q, want it to replace the status line", out)
	}
}

func TestTrainStderrHasNoRedrawsWhenRedirected(t *testing.T) {
	dir := tinyCorpus(t)
	model := filepath.Join(t.TempDir(), "m.pnet")
	var out, errOut bytes.Buffer
	cmd := newRootCmd(&out, &errOut)
	cmd.SetArgs([]string{"train", "--data", filepath.Join(dir, "manifest.csv"), "--out", model, "--epochs", "2", "--cache", ""})
	if err := cmd.Execute(); err != nil {
		t.Fatal(err)
	}
	log := errOut.String()
	if strings.ContainsAny(log, "\r\x1b") {
		t.Errorf("stderr of a redirected run has redraws: %q", log)
	}
	for _, want := range []string{"load train: ", "epoch 1/2: train loss ", "epoch 2/2: train loss "} {
		if !strings.Contains(log, want) {
			t.Errorf("stderr lacks %q:\n%s", want, log)
		}
	}
}

package fsutil

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestWriteWithKeepsOldFileOnError(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "out.txt")
	if err := WriteFile(p, []byte("good")); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	err := WriteWith(p, func(w io.Writer) error {
		w.Write([]byte("partial"))
		return boom
	})
	if !errors.Is(err, boom) {
		t.Fatalf("WriteWith error = %v, want wrapped boom", err)
	}
	got, _ := os.ReadFile(p)
	if string(got) != "good" {
		t.Fatalf("file after failed write = %q, want %q", got, "good")
	}
	ents, _ := os.ReadDir(dir)
	if len(ents) != 1 {
		t.Fatalf("directory holds %d entries after failed write, want 1 (temp file left behind)", len(ents))
	}
}

// TestOutputsAllOrNothing: committed outputs appear with their contents
// and mode 0644; aborted ones leave the old files and no temporary file.
func TestOutputsAllOrNothing(t *testing.T) {
	dir := t.TempDir()
	a, b := filepath.Join(dir, "yard.csv"), filepath.Join(dir, "yard.png")
	if err := WriteFile(a, []byte("old csv")); err != nil {
		t.Fatal(err)
	}
	var o Outputs
	wa, err := o.Create(a)
	if err != nil {
		t.Fatal(err)
	}
	wb, err := o.Create(b)
	if err != nil {
		t.Fatal(err)
	}
	io.WriteString(wa, "new csv")
	io.WriteString(wb, "new png")
	o.Abort()
	if got, _ := os.ReadFile(a); string(got) != "old csv" {
		t.Errorf("after Abort %s holds %q, want the old contents", a, got)
	}
	if _, err := os.Stat(b); !os.IsNotExist(err) {
		t.Errorf("after Abort %s exists (%v)", b, err)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 1 {
		t.Errorf("after Abort the directory holds %d entries, want 1 (temporary files left)", len(ents))
	}

	var c Outputs
	wa, _ = c.Create(a)
	wb, _ = c.Create(b)
	io.WriteString(wa, "new csv")
	io.WriteString(wb, "new png")
	if err := c.Commit(); err != nil {
		t.Fatal(err)
	}
	for p, want := range map[string]string{a: "new csv", b: "new png"} {
		got, _ := os.ReadFile(p)
		fi, err := os.Stat(p)
		if string(got) != want || err != nil || fi.Mode().Perm() != 0o644 {
			t.Errorf("after Commit %s holds %q (mode %v, %v), want %q, 0644", p, got, fi.Mode().Perm(), err, want)
		}
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 2 {
		t.Errorf("after Commit the directory holds %d entries, want 2", len(ents))
	}
	// A directory in the second target's place: nothing is renamed.
	if err := os.Mkdir(filepath.Join(dir, "d.png"), 0o755); err != nil {
		t.Fatal(err)
	}
	var d Outputs
	wa, _ = d.Create(a)
	wb, _ = d.Create(filepath.Join(dir, "d.png"))
	io.WriteString(wb, "newer png")
	io.WriteString(wa, "newer csv")
	if err := d.Commit(); err == nil || !strings.Contains(err.Error(), "d.png") {
		t.Errorf("Commit over a directory: error %v, want one naming d.png", err)
	}
	if got, _ := os.ReadFile(a); string(got) != "new csv" {
		t.Errorf("after a failed Commit %s holds %q, want the committed contents", a, got)
	}
	if ents, _ := os.ReadDir(dir); len(ents) != 3 {
		t.Errorf("after a failed Commit the directory holds %d entries, want 3 (temporary files left)", len(ents))
	}
	if _, err := c.Create(filepath.Join(dir, "no-such-dir", "x.csv")); err == nil {
		t.Error("Create in a missing directory: no error")
	}
}

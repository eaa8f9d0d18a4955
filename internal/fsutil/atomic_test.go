package fsutil

import (
	"errors"
	"io"
	"os"
	"path/filepath"
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

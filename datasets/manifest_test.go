package datasets

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// manifestErr parses m (relative paths under /yard) and returns the
// *ManifestError it fails with, failing the test if it fails otherwise.
func manifestErr(t *testing.T, m string) *ManifestError {
	t.Helper()
	_, err := ParseManifest("yard.csv", []byte(m), "/yard", "")
	var me *ManifestError
	if !errors.As(err, &me) {
		t.Fatalf("manifest %q: error %v, want a *ManifestError", m, err)
	}
	if !errors.Is(err, ErrCorpus) || !strings.Contains(err.Error(), "yard.csv") {
		t.Errorf("manifest %q: error %v does not wrap ErrCorpus or name yard.csv", m, err)
	}
	return me
}

// A manifest saved by a spreadsheet often starts with a UTF-8 byte-order
// mark; it is skipped, not taken as part of the first column's name.
func TestManifestByteOrderMark(t *testing.T) {
	m := "\ufeffpath,label,fold\nsaw1.wav,saw,1\nchip1.wav,chipper,2\n"
	c, err := ParseManifest("yard.csv", []byte(m), "/yard", "")
	if err != nil {
		t.Fatalf("manifest with a UTF-8 BOM: %v", err)
	}
	if len(c.Clips) != 2 || c.Clips[0].Path != filepath.FromSlash("/yard/saw1.wav") || c.Clips[0].Line != 2 {
		t.Errorf("clips %+v", c.Clips)
	}
	// The BOM before a comment line, and a BOM alone.
	if _, err := ParseManifest("yard.csv", []byte("\ufeff# yard\npath,label\na.wav,saw\n"), "/yard", ""); err != nil {
		t.Errorf("BOM then a comment: %v", err)
	}
	if me := manifestErr(t, "\ufeff"); !strings.Contains(me.Reason, "empty manifest") {
		t.Errorf("BOM only: %v, want an empty manifest", me)
	}
	// UTF-16 (as some editors save "Unicode text") is named as such.
	for _, bom := range []string{"\xff\xfe", "\xfe\xff"} {
		if me := manifestErr(t, bom+"p\x00a\x00"); me.Line != 1 || !strings.Contains(me.Reason, "UTF-16") {
			t.Errorf("UTF-16 BOM %q: %v, want line 1 naming UTF-16", bom, me)
		}
	}
}

// Empty manifests, in each form, say so and say what is missing.
func TestManifestEmpty(t *testing.T) {
	for _, m := range []string{"", "\n\n", "# timber yard\n\n", "  \n \t\n", " , \n"} {
		me := manifestErr(t, m)
		if me.Line != 1 || !strings.Contains(me.Reason, "empty manifest") || !strings.Contains(me.Reason, "path") {
			t.Errorf("manifest %q: %v, want line 1: empty manifest, naming the path column", m, me)
		}
	}
	for _, m := range []string{"path,label\n", "# yard\npath,label,fold\n\n# none yet\n"} {
		me := manifestErr(t, m)
		want := strings.Count(m[:strings.Index(m, "path")], "\n") + 1 // the header's line
		if me.Line != want || !strings.Contains(me.Reason, "no clips") || !strings.Contains(me.Reason, "header") {
			t.Errorf("header only %q: %v, want line %d: no clips after the header", m, me, want)
		}
	}
	// ReadManifest of an empty file: the same error, naming the file.
	p := filepath.Join(t.TempDir(), "empty.csv")
	os.WriteFile(p, nil, 0o644)
	if _, err := ReadManifest(p, ""); err == nil || !strings.Contains(err.Error(), p) || !strings.Contains(err.Error(), "empty manifest") {
		t.Errorf("empty file: error %v", err)
	}
}

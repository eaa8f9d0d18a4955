package fsutil

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// A test set is a directory holding files "a" and "b", both with the
// same content (the set's name), so a mix or a half-written set shows.
func writeTestSet(name string) func(dir string) error {
	return func(dir string) error {
		for _, f := range []string{"a", "b"} {
			if err := WriteFile(filepath.Join(dir, f), []byte(name)); err != nil {
				return err
			}
		}
		return nil
	}
}

// testSetOf returns the set dir holds, or an error if it is not one
// whole set.
func testSetOf(dir string) (string, error) {
	ents, err := os.ReadDir(dir)
	if err != nil {
		return "", err
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	if !slices.Equal(names, []string{"a", "b"}) {
		return "", fmt.Errorf("%s holds %v", dir, names)
	}
	a, _ := os.ReadFile(filepath.Join(dir, "a"))
	b, _ := os.ReadFile(filepath.Join(dir, "b"))
	if string(a) != string(b) {
		return "", fmt.Errorf("%s mixes sets %q and %q", dir, a, b)
	}
	return string(a), nil
}

func testOptions(set string) ReplaceOptions {
	return ReplaceOptions{
		Write:       writeTestSet(set),
		Complete:    func(dir string) error { _, err := testSetOf(dir); return err },
		Replaceable: func(dir string) error { _, err := testSetOf(dir); return err },
	}
}

func siblings(t *testing.T, parent string) []string {
	t.Helper()
	ents, err := os.ReadDir(parent)
	if err != nil {
		t.Fatal(err)
	}
	var names []string
	for _, e := range ents {
		names = append(names, e.Name())
	}
	return names
}

// TestReplaceDirKilledAtEveryStep stops ReplaceDir at each of its steps
// as a kill -9 would (no cleanup runs) and checks what a reader finds:
// with the exchange, always one whole set; with two renames, one whole
// set or, between them, no directory and the old set beside it, which
// RecoverDir puts back. A later ReplaceDir then succeeds and leaves
// nothing but the directory.
func TestReplaceDirKilledAtEveryStep(t *testing.T) {
	defer func() { noExchange, crashAt = false, "" }()
	for _, exchange := range []bool{true, false} {
		if a, b := t.TempDir(), t.TempDir(); exchange && errors.Is(exchangeDirs(a, b), errNoExchange) {
			t.Log("this system or file system cannot exchange two directories; two renames only")
			continue
		}
		noExchange = !exchange
		steps := []string{stepTempMade, stepHalfWritten, stepWritten, stepSwapped}
		if !exchange {
			steps = []string{stepTempMade, stepHalfWritten, stepWritten, stepMovedAway, stepMovedIn}
		}
		for _, step := range steps {
			parent := t.TempDir()
			out := filepath.Join(parent, "out")
			if _, err := ReplaceDir(out, testOptions("A")); err != nil {
				t.Fatal(err)
			}
			crashAt = step
			_, err := ReplaceDir(out, testOptions("B"))
			crashAt = ""
			if !errors.Is(err, errCrashed) {
				t.Fatalf("exchange %v, step %s: ReplaceDir returned %v, want the simulated crash", exchange, step, err)
			}
			got, err := testSetOf(out)
			switch {
			case err == nil && (got == "A" || got == "B"):
			case !exchange && step == stepMovedAway && os.IsNotExist(err):
				notes, err := RecoverDir(out, testOptions("").Complete)
				if err != nil {
					t.Fatal(err)
				}
				if got, err := testSetOf(out); err != nil || got != "A" || len(notes) == 0 {
					t.Errorf("two renames, killed between them: RecoverDir gave %q, %v (notes %q), want set A back", got, err, notes)
				}
			default:
				t.Errorf("exchange %v, killed at %s: the directory holds %q, %v", exchange, step, got, err)
			}
			notes, err := ReplaceDir(out, testOptions("C"))
			if err != nil {
				t.Fatalf("exchange %v, step %s: the next ReplaceDir: %v", exchange, step, err)
			}
			if got, err := testSetOf(out); err != nil || got != "C" {
				t.Errorf("exchange %v, step %s: after the next ReplaceDir: %q, %v", exchange, step, got, err)
			}
			if s := siblings(t, parent); !slices.Equal(s, []string{"out"}) {
				t.Errorf("exchange %v, killed at %s: after the next ReplaceDir the parent holds %v (notes %q)", exchange, step, s, notes)
			}
		}
	}
}

// A directory ReplaceDir may not replace is left as it is, and so is one
// whose new contents fail to write; neither leaves a temporary behind.
func TestReplaceDirRefusesAndFailsCleanly(t *testing.T) {
	parent := t.TempDir()
	out := filepath.Join(parent, "out")
	os.Mkdir(out, 0o755)
	os.WriteFile(filepath.Join(out, "notes.txt"), []byte("mine"), 0o644)
	_, err := ReplaceDir(out, testOptions("B"))
	if err == nil || !strings.Contains(err.Error(), "notes.txt") {
		t.Errorf("foreign directory: error %v", err)
	}
	if b, _ := os.ReadFile(filepath.Join(out, "notes.txt")); string(b) != "mine" {
		t.Error("foreign directory changed")
	}
	os.RemoveAll(out)
	if _, err := ReplaceDir(out, testOptions("A")); err != nil {
		t.Fatal(err)
	}
	boom := errors.New("boom")
	o := testOptions("B")
	o.Write = func(dir string) error { writeTestSet("B")(dir); return boom }
	if _, err := ReplaceDir(out, o); !errors.Is(err, boom) {
		t.Errorf("failed write: error %v", err)
	}
	if got, err := testSetOf(out); got != "A" || err != nil {
		t.Errorf("after a failed write: %q, %v; want set A", got, err)
	}
	os.WriteFile(filepath.Join(parent, "file"), nil, 0o644)
	if _, err := ReplaceDir(filepath.Join(parent, "file"), testOptions("B")); err == nil || !strings.Contains(err.Error(), "not a directory") {
		t.Errorf("a file in the way: error %v", err)
	}
	os.Symlink(out, filepath.Join(parent, "link"))
	if _, err := ReplaceDir(filepath.Join(parent, "link"), testOptions("B")); err == nil || !strings.Contains(err.Error(), "symbolic link") {
		t.Errorf("a symbolic link: error %v", err)
	}
	if s := siblings(t, parent); !slices.Equal(s, []string{"file", "link", "out"}) {
		t.Errorf("parent holds %v", s)
	}
}

// RecoverDir never puts back an incomplete set, removes only its own
// directory's leftovers, and leaves the directory alone when it exists.
func TestRecoverDir(t *testing.T) {
	parent := t.TempDir()
	out := filepath.Join(parent, "out")
	old := filepath.Join(parent, ".out.old-1")
	os.Mkdir(old, 0o755)
	os.WriteFile(filepath.Join(old, "a"), []byte("A"), 0o644) // b missing
	os.Mkdir(filepath.Join(parent, ".out.tmp-2"), 0o755)
	os.Mkdir(filepath.Join(parent, ".other.tmp-3"), 0o755)     // another directory's
	os.Mkdir(filepath.Join(parent, ".out.tmp-5.tmp-6"), 0o755) // the temporary of a directory "out.tmp-5"
	notes, err := RecoverDir(out, testOptions("").Complete)
	if err != nil {
		t.Fatal(err)
	}
	if s := siblings(t, parent); !slices.Equal(s, []string{".other.tmp-3", ".out.tmp-5.tmp-6"}) || len(notes) != 2 {
		t.Errorf("after recovery the parent holds %v (notes %q)", s, notes)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Errorf("an incomplete set was put back")
	}
}

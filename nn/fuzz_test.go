package nn

import (
	"testing"
)

// FuzzParseSpec: the spec parser never panics, and whatever it accepts
// rebuilds from its own Spec() output.
func FuzzParseSpec(f *testing.F) {
	for _, name := range ArchNames() {
		s, _ := ArchSpec(name, 4)
		f.Add(s)
	}
	f.Add("conv out=3 kernel=3x3 stride=2 pad=1,1,1,1\nrelu # c\n")
	f.Add("input shape=1x1x1\ndense out=1")
	f.Add("maxpool size=99999999999")
	f.Add("")
	f.Fuzz(func(t *testing.T, text string) {
		layers, in, ok, err := ParseSpec(text)
		if err != nil {
			return
		}
		if !ok {
			in = Shape{8, 8, 2}
		}
		if in.Size() > 1<<16 {
			return
		}
		net, err := newBounded(in, layers, 1, 1<<16)
		if err != nil {
			return
		}
		defer net.Close()
		again, err := FromSpec(net.Spec(), Shape{}, 1)
		if err != nil {
			t.Fatalf("Spec() output does not parse: %v\n%s", err, net.Spec())
		}
		again.Close()
	})
}

// FuzzParseCheckpoint: the checkpoint reader never panics, never allocates
// beyond what the bytes declare, and what it accepts re-encodes to the
// same bytes.
func FuzzParseCheckpoint(f *testing.F) {
	tr := newTinyTrainer(f, 1)
	good, err := tr.MarshalCheckpoint([]byte(`{"k":1}`))
	tr.Net.Close()
	if err != nil {
		f.Fatal(err)
	}
	f.Add(good)
	f.Add(good[:40])
	f.Add([]byte("PIPITCKP\x01\x00\x00\x00\xff\xff\xff\xff"))
	f.Add([]byte{})
	f.Fuzz(func(t *testing.T, data []byte) {
		ck, err := ParseCheckpoint("fuzz.pnet", data)
		if err != nil {
			return
		}
		defer ck.Trainer.Net.Close()
		again, err := ck.Trainer.MarshalCheckpoint(ck.Meta)
		if err != nil {
			t.Fatal(err)
		}
		if _, err := ParseCheckpoint("again", again); err != nil {
			t.Fatalf("re-encoded checkpoint does not parse: %v", err)
		}
	})
}

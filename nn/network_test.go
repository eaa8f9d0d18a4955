package nn

import (
	"strings"
	"testing"
)

// Using a network after Close panics with a message naming the misuse
// (issue #11: it deadlocked, sending to the stopped workers).
func TestUseAfterClosePanics(t *testing.T) {
	net, err := Arch("separable", 8, 1)
	if err != nil {
		t.Fatal(err)
	}
	x := make([]float32, 16*net.Input.Size())
	net.Forward(x, 16, false, nil) // starts the workers when there are several
	net.Close()
	net.Close() // twice is harmless
	for name, f := range map[string]func(){
		"Forward": func() { net.Forward(x, 16, false, nil) },
		"Predict": func() { net.Predict(make([]float32, 16*8), x, 16, 8) },
	} {
		func() {
			defer func() {
				msg, _ := recover().(string)
				if !strings.Contains(msg, "after Close") {
					t.Errorf("%s after Close: panic %q, want one saying it was called after Close", name, msg)
				}
			}()
			f()
		}()
	}
}

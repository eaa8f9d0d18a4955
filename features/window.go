package features

import "math"

// Window names accepted by [Config].Window and [WindowFunc].
const (
	WindowHann    = "hann"
	WindowHamming = "hamming"
)

// WindowFunc returns the n-point window of the given kind.
//
// Both windows are generalised cosine windows w[k] = a0 - a1·cos(2πk/D):
// Hann has a0 = a1 = 0.5, Hamming a0 = 0.54, a1 = 0.46 (Harris 1978,
// Proc. IEEE 66(1), §IV; the 0.54/0.46 rounding is the usual one, not
// Harris's 25/46). periodic selects D = n (the "DFT-even" form Harris
// tabulates, which tiles exactly at 50 % overlap for Hann); otherwise
// D = n-1 (the symmetric form of numpy.hanning and HTK). n = 1 gives [1].
// It allocates the returned slice and returns an error wrapping
// [ErrBadConfig] for an unknown kind or n < 1.
func WindowFunc(kind string, n int, periodic bool) ([]float64, error) {
	var a0, a1 float64
	switch kind {
	case WindowHann:
		a0, a1 = 0.5, 0.5
	case WindowHamming:
		a0, a1 = 0.54, 0.46
	default:
		return nil, badConfig("unknown window %q (want %q or %q)", kind, WindowHann, WindowHamming)
	}
	if n < 1 {
		return nil, badConfig("window length %d < 1", n)
	}
	w := make([]float64, n)
	if n == 1 {
		w[0] = 1
		return w, nil
	}
	d := float64(n - 1)
	if periodic {
		d = float64(n)
	}
	for k := range w {
		w[k] = a0 - a1*math.Cos(2*math.Pi*float64(k)/d)
	}
	return w, nil
}

package nn

import "cmp"

// Argmax returns the index of the largest value of v, the first one on
// ties, or −1 for an empty v. It works on logits of either engine
// (float32, int8) and on probabilities.
func Argmax[T cmp.Ordered](v []T) int {
	if len(v) == 0 {
		return -1
	}
	best := 0
	for i := 1; i < len(v); i++ {
		if v[i] > v[best] {
			best = i
		}
	}
	return best
}

package pages

import (
	"slices"
	"testing"
)

// TestMakeZeroed checks that Make returns a zeroed slice of the asked length, below and above the
// size from which pages are mapped in parallel, and that Touch leaves a new slice's zeros.
func TestMakeZeroed(t *testing.T) {
	for _, n := range []int{0, 1, 511, 512, 513, 3 * minParallel / 8} {
		v := Make[float64](n)
		if len(v) != n || slices.ContainsFunc(v, func(x float64) bool { return x != 0 }) {
			t.Fatalf("Make(%d): length %d or a non-zero value", n, len(v))
		}
		type pair struct{ a, b int32 }
		p := make([]pair, n, n+7)
		Touch(p)
		if slices.ContainsFunc(p[:cap(p)], func(x pair) bool { return x != pair{} }) {
			t.Fatalf("Touch(%d): a non-zero value", n)
		}
	}
}

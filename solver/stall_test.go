package solver

import (
	"context"
	"errors"
	"testing"
)

// TestCGStallIsNotConverged: a tolerance below the rounding floor (1e-19 relative, far under
// double precision's 1e-16) must end as ErrNotConverged after a few restarts, not run to the
// iteration limit.
func TestCGStallIsNotConverged(t *testing.T) {
	const n = 300
	bld := NewBuilder(n, 3*n)
	for i := range n {
		if i > 0 {
			bld.Add(i-1, -1)
		}
		bld.Add(i, 2)
		if i < n-1 {
			bld.Add(i+1, -1)
		}
		bld.EndRow()
	}
	a := bld.CSR()
	b := make([]float64, n)
	for i := range b {
		b[i] = 1/(1+float64(i%7)) + 0.3*float64(i%3)/3.7 // inexact in binary
	}
	x := make([]float64, n)
	st, err := CG(context.Background(), a, b, x, NewJacobi(a), &Settings{Tolerance: 1e-19, MaxIterations: 100000})
	if !errors.Is(err, ErrNotConverged) {
		t.Fatalf("err = %v, want ErrNotConverged", err)
	}
	// n iterations reach the floor in exact arithmetic; rounding (condition ~n²) and a few
	// restarts take several times that. Without the stall rule the solve runs to the 100000 limit.
	if st.Iterations > 10*n {
		t.Errorf("stopped after %d iterations, want ≤ %d (a stall must be detected)", st.Iterations, 10*n)
	}
}

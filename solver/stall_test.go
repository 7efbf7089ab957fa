package solver

import (
	"context"
	"errors"
	"testing"
)

// stallSystem is a 1-D Laplacian with an inexact right-hand side, on which CG cannot reach a
// relative residual of 1e-19 (far under double precision's 1e-16).
func stallSystem() (*CSR, []float64) {
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
	b := make([]float64, n)
	for i := range b {
		b[i] = 1/(1+float64(i%7)) + 0.3*float64(i%3)/3.7 // inexact in binary
	}
	return bld.CSR(), b
}

// opaque hides the *CSR behind an Operator, so that CG cannot bound its rounding.
type opaque struct{ a *CSR }

func (o opaque) Len() int                  { return o.a.Len() }
func (o opaque) MulVecTo(dst, x []float64) { o.a.MulVecTo(dst, x) }

// TestCGStall: a tolerance below the rounding floor must end after a few restarts, not run to the
// iteration limit: converged on the floor (Stats.Floor) when the true residual lies within the
// rounding bound of b − A x (Higham 2002, §3.5), ErrNotConverged when the operator gives no way
// to bound it.
func TestCGStall(t *testing.T) {
	a, b := stallSystem()
	n := a.N
	set := &Settings{Tolerance: 1e-19, MaxIterations: 100000}
	x := make([]float64, n)
	st, err := CG(context.Background(), a, b, x, NewJacobi(a), set)
	if err != nil || !st.Converged || !st.Floor {
		t.Fatalf("CSR: err = %v, converged %v, floor %v; want converged on the rounding floor", err, st.Converged, st.Floor)
	}
	floor, _ := roundingFloor(a, make([]float64, n), b, x)
	if st.Residual > floor/norm(b) || st.Residual <= set.Tolerance {
		t.Errorf("CSR: residual %.3g, want in (%.3g, %.3g]", st.Residual, set.Tolerance, floor/norm(b))
	}
	// n iterations reach the floor in exact arithmetic; rounding (condition ~n²) and a few
	// restarts take several times that. Without the stall rule the solve runs to the 100000 limit.
	if st.Iterations > 10*n {
		t.Errorf("CSR: stopped after %d iterations, want ≤ %d (a stall must be detected)", st.Iterations, 10*n)
	}

	x = make([]float64, n)
	st, err = CG(context.Background(), opaque{a}, b, x, NewJacobi(a), set)
	if !errors.Is(err, ErrNotConverged) || st.Floor {
		t.Fatalf("opaque operator: err = %v, floor %v; want ErrNotConverged", err, st.Floor)
	}
	if st.Iterations > 10*n {
		t.Errorf("opaque operator: stopped after %d iterations, want ≤ %d", st.Iterations, 10*n)
	}
}

// TestCGNoFloorAboveTolerance: a reachable tolerance never reports the floor.
func TestCGNoFloorAboveTolerance(t *testing.T) {
	a, b := stallSystem()
	x := make([]float64, a.N)
	st, err := CG(context.Background(), a, b, x, NewJacobi(a), &Settings{Tolerance: 1e-10})
	if err != nil || !st.Converged || st.Floor || st.Residual > 1e-10 {
		t.Fatalf("err = %v, converged %v, floor %v, residual %.3g", err, st.Converged, st.Floor, st.Residual)
	}
}

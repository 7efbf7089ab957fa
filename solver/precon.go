package solver

import (
	"fmt"
	"math"
)

// Operator is a square linear operator as the Krylov methods see it. *CSR is an Operator.
type Operator interface {
	// Len returns the number of rows (and columns).
	Len() int
	// MulVecTo computes dst = A x; dst and x have length Len and are distinct.
	MulVecTo(dst, x []float64)
}

// Preconditioner approximately solves M dst = r for a fixed matrix M ≈ A. A nil Preconditioner
// passed to CG or BiCGStab means none (M = I). CG needs M symmetric positive definite.
type Preconditioner interface {
	// PreconSolve writes an approximation of M⁻¹ r into dst; dst and r are distinct and have the
	// operator's length. An error stops the solve and is returned wrapped.
	PreconSolve(dst, r []float64) error
}

// Jacobi is the diagonal (point Jacobi) preconditioner M = diag(A): dst_i = r_i / A_ii
// (Saad 2003, ch. 10). It is symmetric positive definite when A's diagonal is positive, so it
// suits CG on an SPD matrix.
type Jacobi struct {
	inv []float64 // 1/A_ii
}

// Diagonaler is a matrix that can write its diagonal: *CSR and *GridMatrix.
type Diagonaler interface {
	Len() int
	DiagonalTo(dst []float64)
}

// NewJacobi returns the Jacobi preconditioner of a. It panics if a diagonal entry is zero or
// missing.
func NewJacobi(a Diagonaler) *Jacobi {
	inv := make([]float64, a.Len())
	a.DiagonalTo(inv)
	for i, d := range inv {
		if d == 0 || math.IsNaN(d) || math.IsInf(d, 0) {
			panic(fmt.Sprintf("solver: NewJacobi: diagonal entry %d must be finite and non-zero, got %g", i, d))
		}
		inv[i] = 1 / d
	}
	return &Jacobi{inv: inv}
}

// PreconSolve computes dst = diag(A)⁻¹ r. It never fails.
func (j *Jacobi) PreconSolve(dst, r []float64) error {
	if len(dst) != len(j.inv) || len(r) != len(j.inv) {
		panic(fmt.Sprintf("solver: Jacobi.PreconSolve: len(dst) = %d and len(r) = %d, want %d", len(dst), len(r), len(j.inv)))
	}
	forBlocks(len(j.inv), func(lo, hi int) { scaleRange(dst[lo:hi], j.inv[lo:hi], r[lo:hi]) })
	return nil
}

// scaleRange computes dst_i = d_i r_i; d and r must be at least as long as dst.
func scaleRange(dst, d, r []float64) {
	d = d[:len(dst)]
	r = r[:len(dst)]
	for i := range dst {
		dst[i] = d[i] * r[i]
	}
}

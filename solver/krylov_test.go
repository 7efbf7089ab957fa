package solver

import (
	"context"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"

	"phipsi/bc"
)

// method is one way of solving a linear system, as the tests see it.
type method struct {
	name  string
	solve func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error)
}

var (
	methodCG = method{"cg", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return CG(ctx, p.a, p.b, x, nil, s)
	}}
	methodPCG = method{"cg+jacobi", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return CG(ctx, p.a, p.b, x, NewJacobi(p.a), s)
	}}
	methodBiCGStab = method{"bicgstab", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return BiCGStab(ctx, p.a, p.b, x, nil, s)
	}}
	methodPBiCGStab = method{"bicgstab+jacobi", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return BiCGStab(ctx, p.a, p.b, x, NewJacobi(p.a), s)
	}}
	methodGS = method{"sor omega=1", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return (&SOR{Red: p.red, Black: p.black}).Solve(ctx, p.a, p.b, x, s)
	}}
	methodSOR = method{"sor omega=optimal", func(ctx context.Context, p gridProblem, x []float64, s *Settings) (Stats, error) {
		return (&SOR{Omega: OptimalOmega(p.n, p.n), Red: p.red, Black: p.black}).Solve(ctx, p.a, p.b, x, s)
	}}
	symmetricMethods = []method{methodCG, methodPCG, methodBiCGStab, methodPBiCGStab, methodGS, methodSOR}
	generalMethods   = []method{methodBiCGStab, methodPBiCGStab, methodGS, methodSOR}
)

// TestAgreesWithDenseSolve compares every applicable method with gonum's dense LU solve on small
// matrices.
func TestAgreesWithDenseSolve(t *testing.T) {
	const (
		// compareTol is the required agreement ‖x − x_dense‖/‖x_dense‖.
		compareTol = 1e-10
		// solveTol is the residual the iterations are asked for. The forward error is at most
		// cond₂(A) times the relative residual, so solveTol·cond₂(A) ≤ compareTol is checked
		// for every matrix before its solves are trusted.
		solveTol = 1e-13
	)
	rng := rand.New(rand.NewPCG(7, 11))
	withGrid := func(a *CSR, red, black []int32, n int) gridProblem {
		return gridProblem{a: a, red: red, black: black, n: n}
	}
	lap := poisson5(9, func(x, y float64) float64 { return 0 }, func(x, y float64) float64 { return 0 })
	gridSym, rs, bs := randomGrid(rng, 9, 7, true)
	gridNonsym, rn, bn := randomGrid(rng, 8, 6, false)
	tests := []struct {
		name    string
		p       gridProblem
		methods []method
	}{
		{"laplacian 9x9 cells", lap, symmetricMethods},
		{"random SPD grid M-matrix 9x7", withGrid(gridSym, rs, bs, 10), symmetricMethods},
		{"random non-symmetric grid M-matrix 8x6", withGrid(gridNonsym, rn, bn, 9), generalMethods},
		{"random SPD dense 30", gridProblem{a: randomDense(rng, 30, 0.3, true)}, []method{methodCG, methodPCG, methodBiCGStab, methodPBiCGStab}},
		{"random non-symmetric dense 30", gridProblem{a: randomDense(rng, 30, 0.3, false)}, []method{methodBiCGStab, methodPBiCGStab}},
		{"shortley-weller hole 12 cells", shortleyWeller(12), generalMethods},
	}
	for _, tt := range tests {
		p := tt.p
		n := p.a.N
		p.b = randVec(rng, n)
		d := toDense(p.a)
		if c := mat.Cond(d, 2); c*solveTol > compareTol {
			t.Fatalf("%s: cond₂ = %.3g is too large for solveTol %g to guarantee %g", tt.name, c, solveTol, compareTol)
		}
		var want mat.VecDense
		if err := want.SolveVec(d, mat.NewVecDense(n, p.b)); err != nil {
			t.Fatalf("%s: dense solve: %v", tt.name, err)
		}
		for _, m := range tt.methods {
			t.Run(tt.name+"/"+m.name, func(t *testing.T) {
				x := make([]float64, n)
				st, err := m.solve(context.Background(), p, x, &Settings{Tolerance: solveTol})
				if err != nil {
					t.Fatalf("solve: %v (stats %+v)", err, st)
				}
				if got := relDiff(x, want.RawVector().Data); got > compareTol {
					t.Errorf("relative difference from the dense solve: got %.3g, want <= %g (stats %+v)", got, compareTol, st)
				}
				// Stats.Residual must be the true residual. Summing b − A x in another order
				// moves each entry by about ε‖A‖‖x‖, which is ~1e-16 relative to ‖b‖ here.
				const residualNoise = 1e-15
				if got := trueRelResidual(p.a, p.b, x); math.Abs(got-st.Residual) > residualNoise {
					t.Errorf("Stats.Residual: got %.6g, want the true residual %.6g", st.Residual, got)
				}
				if !st.Converged || st.Residual > solveTol {
					t.Errorf("Stats: got Converged %v Residual %.3g, want true and <= %g", st.Converged, st.Residual, solveTol)
				}
			})
		}
	}
}

// TestManufacturedSolutions solves stencil problems whose discrete solution is known exactly:
// the 5-point stencil reproduces cubics (its truncation error involves fourth derivatives), the
// Shortley-Weller scheme reproduces quadratics, upwind differences reproduce linear functions.
//
// The allowed error follows from the requested residual: ‖x − u‖_∞ ≤ ‖A⁻¹‖_∞ ‖b − A x‖_∞ ≤
// ‖A⁻¹‖_∞ · solveTol · ‖b‖₂. All three matrices are M-matrices (A⁻¹ ≥ 0), so if A φ ≥ c > 0 for
// some φ ≥ 0 then ‖A⁻¹‖_∞ ≤ max φ / c (comparison function; discrete maximum principle, Varga
// 1962, ch. 3, from memory). With φ = x(1 − x)/2, −Δφ = 1 and both the 5-point and the
// Shortley-Weller rows (scaled by h², exact for quadratics, boundary terms ≥ 0) give A φ ≥ h², so
// ‖A⁻¹‖_∞ ≤ 1/(8h²) = n²/8. For upwind convection-diffusion, ‖A⁻¹‖_∞ is taken from gonum's
// dense inverse.
func TestManufacturedSolutions(t *testing.T) {
	const solveTol = 1e-12 // asked-for relative residual
	// errFactor covers the rounding in forming b, of order ‖A⁻¹‖_∞ ε ‖b‖, far below the bound.
	const errFactor = 2
	cubic := func(x, y float64) float64 { return x*x*x - 3*x*y*y + x*x + y*y } // −Δu = −4
	minus4 := func(x, y float64) float64 { return -4 }
	comparisonBound := func(n int) float64 { return float64(n*n) / 8 }
	fast := []method{methodCG, methodPCG, methodBiCGStab, methodPBiCGStab, methodSOR} // no Gauss-Seidel
	tests := []struct {
		name    string
		p       gridProblem
		invNorm float64 // bound on ‖A⁻¹‖_∞; 0: compute with gonum
		methods []method
		long    bool
	}{
		{"poisson cubic 32 cells", poisson5(32, cubic, minus4), comparisonBound(32), symmetricMethods, false},
		{"poisson cubic 128 cells", poisson5(128, cubic, minus4), comparisonBound(128), fast, true},
		{"convection-diffusion upwind 24 cells, cell Péclet 0.5", convectionDiffusion(24, 12, -6), 0, generalMethods, false},
		{"shortley-weller hole 24 cells", shortleyWeller(24), comparisonBound(24), generalMethods, false},
		{"shortley-weller hole 96 cells", shortleyWeller(96), comparisonBound(96), fast[2:], true},
	}
	// Check the comparison bound against the exact norm where that is cheap.
	for _, p := range []gridProblem{poisson5(12, cubic, minus4), shortleyWeller(12)} {
		if got, bound := invNormInf(t, p.a), comparisonBound(p.n); got > bound {
			t.Fatalf("‖A⁻¹‖_∞ with %d cells: got %.6g from gonum, above the bound n²/8 = %.6g", p.n, got, bound)
		}
	}
	for _, tt := range tests {
		if tt.long && testing.Short() {
			continue
		}
		invNorm := tt.invNorm
		if invNorm == 0 {
			invNorm = invNormInf(t, tt.p.a)
		}
		errTol := errFactor * invNorm * solveTol * norm(tt.p.b)
		for _, m := range tt.methods {
			t.Run(tt.name+"/"+m.name, func(t *testing.T) {
				x := make([]float64, tt.p.a.N)
				st, err := m.solve(context.Background(), tt.p, x, &Settings{Tolerance: solveTol})
				if err != nil {
					t.Fatalf("solve: %v", err)
				}
				var maxErr float64
				for i := range x {
					maxErr = max(maxErr, math.Abs(x[i]-tt.p.exact[i]))
				}
				if maxErr > errTol {
					t.Errorf("max error from the exact discrete solution: got %.3g, want <= %.3g (%d iterations)", maxErr, errTol, st.Iterations)
				}
				t.Logf("%d iterations, residual %.3g, restarts %d, max error %.3g (bound %.3g)", st.Iterations, st.Residual, st.Restarts, maxErr, errTol)
			})
		}
	}
}

// invNormInf returns ‖A⁻¹‖_∞, the largest absolute row sum of gonum's dense inverse.
func invNormInf(t *testing.T, a *CSR) float64 {
	t.Helper()
	var inv mat.Dense
	if err := inv.Inverse(toDense(a)); err != nil {
		t.Fatalf("dense inverse: %v", err)
	}
	var worst float64
	for i := range a.N {
		var s float64
		for j := range a.N {
			s += math.Abs(inv.At(i, j))
		}
		worst = max(worst, s)
	}
	return worst
}

func TestNotConverged(t *testing.T) {
	const maxIter = 3
	p := poisson5(32, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 0 })
	for _, m := range symmetricMethods {
		t.Run(m.name, func(t *testing.T) {
			x := make([]float64, p.a.N)
			st, err := m.solve(context.Background(), p, x, &Settings{MaxIterations: maxIter})
			if !errors.Is(err, ErrNotConverged) {
				t.Fatalf("error: got %v, want ErrNotConverged", err)
			}
			if st.Iterations != maxIter || st.Converged {
				t.Errorf("Stats: got Iterations %d Converged %v, want %d false", st.Iterations, st.Converged, maxIter)
			}
			want := trueRelResidual(p.a, p.b, x)
			// The reported residual is recomputed from b − A x: equal up to rounding.
			if math.Abs(st.Residual-want) > 1e-12*want || !(want > DefaultTolerance) {
				t.Errorf("Stats.Residual: got %.12g, want the true residual %.12g (above the tolerance)", st.Residual, want)
			}
		})
	}
}

func TestCancelledContext(t *testing.T) {
	p := poisson5(64, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 0 })
	t.Run("before the solve", func(t *testing.T) {
		ctx, cancel := context.WithCancel(context.Background())
		cancel()
		for _, m := range symmetricMethods {
			x := make([]float64, p.a.N)
			st, err := m.solve(ctx, p, x, nil)
			if !errors.Is(err, context.Canceled) || st.Iterations != 0 {
				t.Errorf("%s: got error %v after %d iterations, want context.Canceled after 0", m.name, err, st.Iterations)
			}
		}
	})
	t.Run("during the solve", func(t *testing.T) {
		const cancelAt = 5
		for _, m := range symmetricMethods {
			ctx, cancel := context.WithCancel(context.Background())
			s := &Settings{Progress: func(iter int, _ float64) {
				if iter == cancelAt {
					cancel()
				}
			}}
			x := make([]float64, p.a.N)
			st, err := m.solve(ctx, p, x, s)
			cancel()
			// The context is checked at the start of every iteration; SOR reports an
			// iterate's residual during the next sweep, so it may run one sweep more.
			if !errors.Is(err, context.Canceled) || st.Iterations > cancelAt+1 {
				t.Errorf("%s: got error %v after %d iterations, want context.Canceled after <= %d", m.name, err, st.Iterations, cancelAt+1)
			}
			if want := trueRelResidual(p.a, p.b, x); math.Abs(st.Residual-want) > 1e-12*want {
				t.Errorf("%s: Stats.Residual: got %.12g, want the true residual %.12g", m.name, st.Residual, want)
			}
		}
	})
}

func TestSettings(t *testing.T) {
	p := poisson5(16, func(x, y float64) float64 { return x - y }, func(x, y float64) float64 { return 1 })
	for _, m := range symmetricMethods {
		t.Run(m.name, func(t *testing.T) {
			calls := 0
			s := &Settings{Progress: func(int, float64) { calls++ }}
			x := make([]float64, p.a.N)
			st, err := m.solve(context.Background(), p, x, s)
			if err != nil {
				t.Fatalf("solve: %v", err)
			}
			if s.Tolerance != 0 || s.MaxIterations != 0 || s.Progress == nil {
				t.Errorf("settings after the solve: got %+v, want the zero tolerance and limit unchanged", *s)
			}
			if st.Residual > DefaultTolerance {
				t.Errorf("residual with default settings: got %.3g, want <= %g", st.Residual, DefaultTolerance)
			}
			if calls < st.Iterations-1 || calls > st.Iterations {
				// SOR learns the residual of the last sweep from the next; the last one is
				// reported when checked. Krylov methods report every iteration.
				t.Errorf("Progress calls: got %d, want one per iteration (%d)", calls, st.Iterations)
			}
			// A nil *Settings means the defaults too.
			y := make([]float64, p.a.N)
			st2, err := m.solve(context.Background(), p, y, nil)
			if err != nil || st2.Iterations != st.Iterations || !slices.Equal(x, y) {
				t.Errorf("nil settings: got %d iterations, error %v, want %d and the same x", st2.Iterations, err, st.Iterations)
			}
		})
	}
	t.Run("invalid values panic", func(t *testing.T) {
		x := make([]float64, p.a.N)
		expectPanic(t, "Tolerance must be >= 0", func() { _, _ = CG(context.Background(), p.a, p.b, x, nil, &Settings{Tolerance: -1}) })
		expectPanic(t, "MaxIterations must be >= 0", func() { _, _ = BiCGStab(context.Background(), p.a, p.b, x, nil, &Settings{MaxIterations: -2}) })
		expectPanic(t, "len(b) = 3", func() { _, _ = CG(context.Background(), p.a, p.b[:3], x, nil, nil) })
	})
}

func TestZeroRightHandSideAndExactGuess(t *testing.T) {
	p := poisson5(8, func(x, y float64) float64 { return 0 }, func(x, y float64) float64 { return 0 })
	exact := poisson5(8, func(x, y float64) float64 { return x*x - y*y }, func(x, y float64) float64 { return 0 })
	for _, m := range symmetricMethods {
		t.Run(m.name, func(t *testing.T) {
			x := randVec(rand.New(rand.NewPCG(3, 4)), p.a.N)
			st, err := m.solve(context.Background(), p, x, nil)
			if err != nil || !st.Converged || st.Iterations != 0 || slices.ContainsFunc(x, func(v float64) bool { return v != 0 }) {
				t.Errorf("b = 0: got error %v, stats %+v, x non-zero %v; want x = 0 at once", err, st, slices.ContainsFunc(x, func(v float64) bool { return v != 0 }))
			}
			x = slices.Clone(exact.exact)
			st, err = m.solve(context.Background(), exact, x, nil)
			if err != nil || !st.Converged || st.Iterations != 0 {
				t.Errorf("exact initial guess: got error %v, stats %+v; want convergence with 0 iterations", err, st)
			}
		})
	}
}

// opFunc is an Operator given by a function, hiding any concrete type.
type opFunc struct {
	n   int
	mul func(dst, x []float64)
}

func (o opFunc) Len() int                  { return o.n }
func (o opFunc) MulVecTo(dst, x []float64) { o.mul(dst, x) }

// poisonAt returns an operator that multiplies by a but writes NaN into the result of its k-th
// call (counting from 1).
func poisonAt(a *CSR, k int) Operator {
	calls := 0
	return opFunc{a.N, func(dst, x []float64) {
		a.MulVecTo(dst, x)
		calls++
		if calls == k {
			dst[len(dst)/2] = math.NaN()
		}
	}}
}

// precFunc is a Preconditioner given by a function.
type precFunc func(dst, r []float64) error

func (f precFunc) PreconSolve(dst, r []float64) error { return f(dst, r) }

func TestBreakdownsAreErrors(t *testing.T) {
	p := poisson5(16, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 1 })
	swap := &CSR{N: 2, RowPtr: []int{0, 1, 2}, Col: []int32{1, 0}, Val: []float64{1, 1}}
	indefinite := &CSR{N: 2, RowPtr: []int{0, 1, 2}, Col: []int32{0, 1}, Val: []float64{1, -1}}
	errPrecon := errors.New("preconditioner failed on purpose")
	failing := precFunc(func(dst, r []float64) error { return errPrecon })
	tests := []struct {
		name  string
		solve func(x []float64) (Stats, error)
		a     *CSR
		b     []float64
		want  error
	}{
		{"cg on an indefinite matrix", func(x []float64) (Stats, error) {
			return CG(context.Background(), indefinite, []float64{1, 1}, x, nil, nil)
		}, indefinite, []float64{1, 1}, ErrBreakdown},
		{"cg with NaN from the operator", func(x []float64) (Stats, error) {
			return CG(context.Background(), poisonAt(p.a, 4), p.b, x, nil, nil)
		}, p.a, p.b, ErrBreakdown},
		{"cg with a failing preconditioner", func(x []float64) (Stats, error) {
			return CG(context.Background(), p.a, p.b, x, failing, nil)
		}, p.a, p.b, errPrecon},
		// r̂ = r = (1, 0), A r = (0, 1): r̂·A r = 0 right after the start, which no restart
		// can cure.
		{"bicgstab on a permutation", func(x []float64) (Stats, error) {
			return BiCGStab(context.Background(), swap, []float64{1, 0}, x, nil, nil)
		}, swap, []float64{1, 0}, ErrBreakdown},
		{"bicgstab with NaN from the operator", func(x []float64) (Stats, error) {
			return BiCGStab(context.Background(), poisonAt(p.a, 6), p.b, x, nil, nil)
		}, p.a, p.b, ErrBreakdown},
		{"bicgstab with a failing preconditioner", func(x []float64) (Stats, error) {
			return BiCGStab(context.Background(), p.a, p.b, x, failing, nil)
		}, p.a, p.b, errPrecon},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			x := make([]float64, len(tt.b))
			st, err := tt.solve(x)
			if !errors.Is(err, tt.want) {
				t.Fatalf("error: got %v, want %v", err, tt.want)
			}
			if slices.ContainsFunc(x, func(v float64) bool { return !isFinite(v) }) {
				t.Errorf("x has a non-finite entry after %v", err)
			}
			if st.Converged || !isFinite(st.Residual) {
				t.Errorf("Stats: got Converged %v Residual %v, want false and finite", st.Converged, st.Residual)
			}
			if want := trueRelResidual(tt.a, tt.b, x); math.Abs(st.Residual-want) > 1e-12*want {
				t.Errorf("Stats.Residual: got %.12g, want the true residual %.12g", st.Residual, want)
			}
		})
	}
}

// TestBiCGStabIndefiniteNeverNaN runs BiCGStab on random indefinite tridiagonal matrices, where
// breakdowns are common: a diagonal of mixed signs with small couplings, and a dominant skew part
// (−1 below, +1 above the diagonal) with a small diagonal, on which BiCGStab often stalls.
// Whatever the outcome, x and the residual must be finite, a reported convergence must be real,
// and the restart path must have been taken somewhere (else the test is not testing it).
func TestBiCGStabIndefiniteNeverNaN(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 6))
	restarts, converged := 0, 0
	for trial := range 60 {
		skew := trial%2 == 1
		t.Run(fmt.Sprintf("trial %d skew %v", trial, skew), func(t *testing.T) {
			n := 4 + rng.IntN(30)
			bld := NewBuilder(n, 3*n)
			for i := range n {
				lower, diag, upper := 0.3*(2*rng.Float64()-1), float64(1+rng.IntN(3))*float64(1-2*(i%2)), 0.3*(2*rng.Float64()-1)
				if skew {
					lower, diag, upper = -1, 0.2*(2*rng.Float64()-1), 1
				}
				if i > 0 {
					bld.Add(i-1, lower)
				}
				bld.Add(i, diag)
				if i+1 < n {
					bld.Add(i+1, upper)
				}
				bld.EndRow()
			}
			a := bld.CSR()
			b := randVec(rng, n)
			x := make([]float64, n)
			st, err := BiCGStab(context.Background(), a, b, x, nil, &Settings{MaxIterations: 300})
			restarts += st.Restarts
			if err == nil {
				converged++
			}
			if err != nil && !errors.Is(err, ErrBreakdown) && !errors.Is(err, ErrNotConverged) {
				t.Fatalf("error: got %v, want nil, ErrBreakdown or ErrNotConverged", err)
			}
			if slices.ContainsFunc(x, func(v float64) bool { return !isFinite(v) }) || !isFinite(st.Residual) {
				t.Fatalf("non-finite output: x %v, residual %v", x, st.Residual)
			}
			// Same computation in another order: equal up to rounding, relative to ‖b‖.
			const residualNoise = 1e-13
			if want := trueRelResidual(a, b, x); math.Abs(st.Residual-want) > residualNoise {
				t.Errorf("Stats.Residual: got %.12g, want the true residual %.12g", st.Residual, want)
			}
			if st.Converged != (err == nil) || (st.Converged && st.Residual > DefaultTolerance) {
				t.Errorf("got Converged %v, Residual %.3g, error %v: inconsistent", st.Converged, st.Residual, err)
			}
		})
	}
	if restarts == 0 || converged == 0 {
		t.Errorf("over all trials: %d restarts and %d convergences, want both > 0 for the test to mean something", restarts, converged)
	}
	t.Logf("over all trials: %d restarts, %d converged", restarts, converged)
}

// TestNoAllocationPerIteration checks that a solve allocates the same whether it runs few or many
// iterations: work vectors are allocated once per call. Both solves converge, so no error message
// is formatted (fmt's buffer pool makes allocation counts jitter under the race detector).
func TestNoAllocationPerIteration(t *testing.T) {
	const (
		looseTol = 1e-2  // a few iterations
		tightTol = 1e-10 // many iterations
	)
	p := poisson5(32, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 0 })
	jac := NewJacobi(p.a)
	x := make([]float64, p.a.N)
	solves := []struct {
		name  string
		solve func(s *Settings) (Stats, error)
	}{
		{"cg", func(s *Settings) (Stats, error) { return CG(context.Background(), p.a, p.b, x, nil, s) }},
		{"cg+jacobi", func(s *Settings) (Stats, error) { return CG(context.Background(), p.a, p.b, x, jac, s) }},
		{"bicgstab", func(s *Settings) (Stats, error) { return BiCGStab(context.Background(), p.a, p.b, x, nil, s) }},
		{"bicgstab+jacobi", func(s *Settings) (Stats, error) { return BiCGStab(context.Background(), p.a, p.b, x, jac, s) }},
		{"sor", func(s *Settings) (Stats, error) {
			return (&SOR{Omega: 1.8, Red: p.red, Black: p.black}).Solve(context.Background(), p.a, p.b, x, s)
		}},
	}
	for _, sv := range solves {
		t.Run(sv.name, func(t *testing.T) {
			var iters [2]int
			var allocs [2]float64
			for k, tol := range [2]float64{looseTol, tightTol} {
				s := &Settings{Tolerance: tol}
				allocs[k] = testing.AllocsPerRun(3, func() {
					clear(x)
					st, err := sv.solve(s)
					if err != nil {
						t.Fatalf("tolerance %g: %v", tol, err)
					}
					iters[k] = st.Iterations
				})
			}
			if iters[1] < iters[0]+50 {
				t.Fatalf("iterations: got %d and %d, want at least 50 more in the second for the test to mean something", iters[0], iters[1])
			}
			if allocs[1] != allocs[0] {
				t.Errorf("allocations: got %v for %d iterations, want %v as for %d", allocs[1], iters[1], allocs[0], iters[0])
			}
		})
	}
}

// TestGenericOperatorSameBits checks that the fused kernels used for a *CSR give bit-identical
// results to the generic Operator path, as the code claims.
func TestGenericOperatorSameBits(t *testing.T) {
	lap := poisson5(40, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 1 })
	sw := shortleyWeller(40)
	tests := []struct {
		name  string
		p     gridProblem
		solve func(a Operator, p gridProblem, x []float64) (Stats, error)
	}{
		{"cg on the laplacian", lap, func(a Operator, p gridProblem, x []float64) (Stats, error) {
			return CG(context.Background(), a, p.b, x, nil, nil)
		}},
		{"bicgstab+jacobi on shortley-weller", sw, func(a Operator, p gridProblem, x []float64) (Stats, error) {
			return BiCGStab(context.Background(), a, p.b, x, NewJacobi(p.a), nil)
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			x1 := make([]float64, tt.p.a.N)
			x2 := make([]float64, tt.p.a.N)
			st1, err1 := tt.solve(tt.p.a, tt.p, x1)
			st2, err2 := tt.solve(opFunc{tt.p.a.N, tt.p.a.MulVecTo}, tt.p, x2)
			if err1 != nil || err2 != nil || st1 != st2 || !slices.Equal(x1, x2) {
				t.Errorf("generic: %+v %v; *CSR: %+v %v; want identical stats and x", st2, err2, st1, err1)
			}
		})
	}
}

// TestRestartOnFalseConvergence makes the recursive residual lie: the operator changes from A to
// A + δI after a few products, so from then on the recursive residual is off by a fixed vector
// and reaches the tolerance while the true one does not. The method must notice, restart from the
// true residual and solve the system it ends with.
func TestRestartOnFalseConvergence(t *testing.T) {
	const (
		switchAt = 10  // operator products before the change
		delta    = 0.5 // shift added to the diagonal; keeps A SPD and an M-matrix
	)
	p := poisson5(24, func(x, y float64) float64 { return x*x - y*y }, func(x, y float64) float64 { return 0 })
	// The shifted matrix, built independently, to check the answer.
	bld := NewBuilder(p.a.N, p.a.NNZ())
	for i := range p.a.N {
		for k := p.a.RowPtr[i]; k < p.a.RowPtr[i+1]; k++ {
			bld.Add(int(p.a.Col[k]), p.a.Val[k])
		}
		bld.Add(i, delta)
		bld.EndRow()
	}
	shifted := bld.CSR()
	switching := func() Operator {
		calls := 0
		return opFunc{p.a.N, func(dst, x []float64) {
			calls++
			if calls <= switchAt {
				p.a.MulVecTo(dst, x)
				return
			}
			shifted.MulVecTo(dst, x)
		}}
	}
	tests := []struct {
		name  string
		solve func(a Operator, x []float64) (Stats, error)
	}{
		{"cg", func(a Operator, x []float64) (Stats, error) { return CG(context.Background(), a, p.b, x, nil, nil) }},
		{"bicgstab", func(a Operator, x []float64) (Stats, error) {
			return BiCGStab(context.Background(), a, p.b, x, nil, nil)
		}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			x := make([]float64, p.a.N)
			st, err := tt.solve(switching(), x)
			if err != nil {
				t.Fatalf("solve: %v", err)
			}
			if st.Restarts < 1 {
				t.Errorf("Restarts: got %d, want >= 1 (the recursive residual was wrong)", st.Restarts)
			}
			if got := trueRelResidual(shifted, p.b, x); got > DefaultTolerance {
				t.Errorf("true residual for A + δI: got %.3g, want <= %g", got, DefaultTolerance)
			}
		})
	}
}

// sameBits reports whether x and y hold the same float64 values bit for bit (NaNs included).
func sameBits(x, y []float64) bool {
	return slices.EqualFunc(x, y, func(a, b float64) bool { return math.Float64bits(a) == math.Float64bits(b) })
}

// TestWorkspaceSameBits checks that a solve with a reused workspace gives the same x, Stats and
// error as the plain function, bit for bit. One workspace serves every case, largest first, and
// is filled with NaN before each solve, so a method that read a work vector before writing it
// would differ (or turn NaN).
func TestWorkspaceSameBits(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 9))
	lap := poisson5(48, func(x, y float64) float64 { return x*x - y*y + x }, func(x, y float64) float64 { return 1 })
	lapSmall := poisson5(20, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 0 })
	sw := shortleyWeller(32)
	psi := mgPassageCylinder.psi(t, 6000)
	mgPsi, err := NewMultigrid(psi.A, psi.Mesh.Grid, psi.Nodes, MGOptions{})
	if err != nil {
		t.Fatal(err)
	}
	psiRHS := psiRightHandSides(psi)
	phiMeshCyl := mgPassageCylinder.mesh(t, 6000)
	phiSet, err := bc.New(phiMeshCyl, 1, make([]bc.Body, len(phiMeshCyl.Geom.Bodies)))
	if err != nil {
		t.Fatal(err)
	}
	phi, err := AssemblePhi(phiMeshCyl, phiSet, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	phiGuess := make([]float64, phi.A.N)
	phi.InitialGuess(phiGuess)
	mgPhi, err := NewMultigrid(phi.A, phi.Mesh.Grid, phi.Nodes, MGOptions{Symmetric: true})
	if err != nil {
		t.Fatal(err)
	}
	few := &Settings{MaxIterations: 3}

	type solveFunc func(ctx context.Context, a Operator, b, x []float64, m Preconditioner, s *Settings) (Stats, error)
	type pair struct {
		plain solveFunc
		ws    func(w *Workspace) solveFunc
	}
	cg := pair{CG, func(w *Workspace) solveFunc { return w.CG }}
	bicg := pair{BiCGStab, func(w *Workspace) solveFunc { return w.BiCGStab }}
	// Operators are made afresh for every solve: a poisoned one counts its calls.
	same := func(a Operator) func() Operator { return func() Operator { return a } }
	poisoned := func(a *CSR, k int) func() Operator { return func() Operator { return poisonAt(a, k) } }
	tests := []struct {
		name string
		f    pair
		a    func() Operator
		b    []float64
		x0   []float64 // initial guess
		m    Preconditioner
		s    *Settings
	}{
		{"bicgstab+mg psi B0", bicg, same(psi.A), psiRHS[0], make([]float64, psi.A.N), mgPsi, nil},
		{"bicgstab+mg psi BK", bicg, same(psi.A), psiRHS[1], make([]float64, psi.A.N), mgPsi, nil},
		{"cg+mg phi", cg, same(phi.A), phi.B, phiGuess, mgPhi, nil},
		{"cg laplacian", cg, same(lap.a), lap.b, make([]float64, lap.a.N), nil, nil},
		{"cg+jacobi laplacian", cg, same(lap.a), lap.b, randVec(rng, lap.a.N), NewJacobi(lap.a), nil},
		{"cg+jacobi not converged", cg, same(lap.a), lap.b, make([]float64, lap.a.N), NewJacobi(lap.a), few},
		{"cg poisoned operator", cg, poisoned(lap.a, 7), lap.b, make([]float64, lap.a.N), nil, nil},
		{"bicgstab shortley-weller", bicg, same(sw.a), sw.b, make([]float64, sw.a.N), nil, nil},
		{"bicgstab+jacobi shortley-weller", bicg, same(sw.a), sw.b, randVec(rng, sw.a.N), NewJacobi(sw.a), nil},
		{"bicgstab+jacobi not converged", bicg, same(sw.a), sw.b, make([]float64, sw.a.N), NewJacobi(sw.a), few},
		{"bicgstab poisoned operator", bicg, poisoned(sw.a, 9), sw.b, make([]float64, sw.a.N), nil, nil},
		{"cg smaller laplacian", cg, same(lapSmall.a), lapSmall.b, make([]float64, lapSmall.a.N), NewJacobi(lapSmall.a), nil},
		{"bicgstab smaller laplacian", bicg, same(lapSmall.a), lapSmall.b, make([]float64, lapSmall.a.N), NewJacobi(lapSmall.a), nil},
	}
	var w Workspace
	w.ReserveBiCGStab(psi.A.N) // the largest case
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			want := slices.Clone(tt.x0)
			wantSt, wantErr := tt.f.plain(context.Background(), tt.a(), tt.b, want, tt.m, tt.s)
			for round := range 2 {
				for i := range w.buf {
					w.buf[i] = math.NaN()
				}
				got := slices.Clone(tt.x0)
				st, err := tt.f.ws(&w)(context.Background(), tt.a(), tt.b, got, tt.m, tt.s)
				if st != wantSt || fmt.Sprint(err) != fmt.Sprint(wantErr) || !sameBits(got, want) {
					t.Errorf("round %d: got %+v, error %v, x same bits %v; want %+v, error %v and the same x as the plain call",
						round, st, err, sameBits(got, want), wantSt, wantErr)
				}
			}
		})
	}
	if len(w.buf) != (&Workspace{}).bicgstabVectors(true)*psi.A.N {
		t.Errorf("workspace: got %d values, want the %d reserved (no case needs more)", len(w.buf), (&Workspace{}).bicgstabVectors(true)*psi.A.N)
	}
}

// TestWorkspaceLastIterate: a workspace that keeps no best iterate needs one vector less, gives
// the same bits as the default one on a solve that converges (the best iterate is never read
// then), and on one that does not returns an iterate whose reported residual is its own true
// residual and no smaller than the default's (which returns the better of the last and the best).
func TestWorkspaceLastIterate(t *testing.T) {
	sw := shortleyWeller(32)
	psi := mgPassageCylinder.psi(t, 6000)
	mgPsi, err := NewMultigrid(psi.A, psi.Mesh.Grid, psi.Nodes, MGOptions{OperatorWeights: true})
	if err != nil {
		t.Fatal(err)
	}
	tests := []struct {
		name string
		a    *CSR
		b    []float64
		m    Preconditioner
		s    *Settings
	}{
		{"mg psi", psi.A.CSR(), psiRightHandSides(psi)[0], mgPsi, nil},
		{"jacobi shortley-weller", sw.a, sw.b, NewJacobi(sw.a), nil},
		{"jacobi shortley-weller not converged", sw.a, sw.b, NewJacobi(sw.a), &Settings{MaxIterations: 3}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var full Workspace
			last := Workspace{lastIterate: true}
			last.ReserveBiCGStab(tt.a.N)
			if want := (full.bicgstabVectors(true) - 1) * tt.a.N; len(last.buf) != want {
				t.Errorf("reserved %d values, want %d", len(last.buf), want)
			}
			want := make([]float64, tt.a.N)
			wantSt, wantErr := full.BiCGStab(context.Background(), tt.a, tt.b, want, tt.m, tt.s)
			got := make([]float64, tt.a.N)
			st, err := last.BiCGStab(context.Background(), tt.a, tt.b, got, tt.m, tt.s)
			if len(last.buf) != (full.bicgstabVectors(true)-1)*tt.a.N {
				t.Errorf("the solve grew the workspace to %d values", len(last.buf))
			}
			if wantErr == nil {
				if err != nil || st != wantSt || !sameBits(got, want) {
					t.Errorf("got %+v, %v, same bits %v; want %+v and the default's bits", st, err, sameBits(got, want), wantSt)
				}
				return
			}
			if !errors.Is(err, ErrNotConverged) || st.Iterations != wantSt.Iterations {
				t.Fatalf("got %+v, %v; want ErrNotConverged after %d iterations", st, err, wantSt.Iterations)
			}
			if own := trueRelResidual(tt.a, tt.b, got); math.Abs(st.Residual-own) > 1e-12*own || st.Residual < wantSt.Residual {
				t.Errorf("residual %.12g, own true residual %.12g, default's %.12g", st.Residual, own, wantSt.Residual)
			}
		})
	}
}

// TestWorkspaceAllocs checks that a converging solve with a reserved workspace allocates nothing,
// at two sizes of each problem, and that the workspace keeps its memory.
func TestWorkspaceAllocs(t *testing.T) {
	type problem struct {
		a interface {
			Operator
			Diagonaler
		}
		b []float64
		m Preconditioner
	}
	laplacian := func(cells int, jacobi bool) problem {
		p := poisson5(cells, func(x, y float64) float64 { return x * y }, func(x, y float64) float64 { return 0 })
		if jacobi {
			return problem{p.a, p.b, NewJacobi(p.a)}
		}
		return problem{p.a, p.b, nil}
	}
	psiMG := func(cells int) problem {
		sys := mgPassageCylinder.psi(t, cells)
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
		if err != nil {
			t.Fatal(err)
		}
		return problem{sys.A, sys.B0, mg}
	}
	type solveFunc func(w *Workspace, p problem, x []float64) (Stats, error)
	cg := func(w *Workspace, p problem, x []float64) (Stats, error) {
		return w.CG(context.Background(), p.a, p.b, x, p.m, nil)
	}
	bicg := func(w *Workspace, p problem, x []float64) (Stats, error) {
		return w.BiCGStab(context.Background(), p.a, p.b, x, p.m, nil)
	}
	tests := []struct {
		name     string
		solve    solveFunc
		problems [2]problem // a small and a larger one
	}{
		{"cg", cg, [2]problem{laplacian(16, false), laplacian(64, false)}},
		{"cg+jacobi", cg, [2]problem{laplacian(16, true), laplacian(64, true)}},
		{"bicgstab", bicg, [2]problem{laplacian(16, false), laplacian(64, false)}},
		{"bicgstab+jacobi", bicg, [2]problem{laplacian(16, true), laplacian(64, true)}},
		{"bicgstab+multigrid psi", bicg, [2]problem{psiMG(2000), psiMG(20000)}},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			for _, p := range tt.problems {
				n := p.a.Len()
				x := make([]float64, n)
				var w Workspace
				w.ReserveBiCGStab(n)
				first := &w.buf[0]
				solve := func() {
					clear(x)
					if _, err := tt.solve(&w, p, x); err != nil {
						t.Fatalf("%d unknowns: %v", n, err)
					}
				}
				solve() // the multigrid starts its helpers on first use
				if got := testing.AllocsPerRun(5, solve); got != 0 {
					t.Errorf("%d unknowns: got %v allocations per solve, want 0", n, got)
				}
				if &w.buf[0] != first {
					t.Errorf("%d unknowns: the workspace was reallocated, want its reserved memory reused", n)
				}
			}
		})
	}
}

func TestWorkspaceReserve(t *testing.T) {
	tests := []struct {
		name    string
		reserve func(w *Workspace)
		want    int // values held afterwards
	}{
		{"cg", func(w *Workspace) { w.ReserveCG(100) }, 300},
		{"bicgstab", func(w *Workspace) { w.ReserveBiCGStab(100) }, 700},
		{"bicgstab then cg keeps the larger", func(w *Workspace) { w.ReserveBiCGStab(100); w.ReserveCG(100) }, 700},
		{"cg then bicgstab grows", func(w *Workspace) { w.ReserveCG(100); w.ReserveBiCGStab(100) }, 700},
		{"zero", func(w *Workspace) { w.ReserveCG(0) }, 0},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			var w Workspace
			tt.reserve(&w)
			if len(w.buf) != tt.want {
				t.Errorf("got %d values, want %d", len(w.buf), tt.want)
			}
		})
	}
	t.Run("a solve grows a small workspace", func(t *testing.T) {
		p := poisson5(8, func(x, y float64) float64 { return x + y }, func(x, y float64) float64 { return 0 })
		var w Workspace
		w.ReserveCG(3)
		if _, err := w.BiCGStab(context.Background(), p.a, p.b, make([]float64, p.a.Len()), NewJacobi(p.a), nil); err != nil {
			t.Fatal(err)
		}
		if want := (&Workspace{}).bicgstabVectors(true) * p.a.Len(); len(w.buf) != want {
			t.Errorf("got %d values, want %d", len(w.buf), want)
		}
	})
	t.Run("negative n panics", func(t *testing.T) {
		var w Workspace
		expectPanic(t, "n must be >= 0, got -1", func() { w.ReserveCG(-1) })
		expectPanic(t, "n must be >= 0, got -2", func() { w.ReserveBiCGStab(-2) })
	})
}

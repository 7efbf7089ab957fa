package solver

import (
	"context"
	"errors"
	"fmt"
	"math"

	"phipsi/internal/pages"
)

// Default settings of a solve, used where a Settings field is zero.
const (
	DefaultTolerance     = 1e-10
	DefaultMaxIterations = 20000
)

// Settings controls a solve. The zero value (and a nil *Settings) means the defaults. A solve
// copies its settings and never writes back into them.
type Settings struct {
	// Tolerance is the relative residual ‖b − A x‖₂ / ‖b‖₂ at which a solve stops;
	// 0 means DefaultTolerance. It must not be negative.
	Tolerance float64
	// MaxIterations bounds the number of iterations (SOR: sweeps); 0 means
	// DefaultMaxIterations. It must not be negative.
	MaxIterations int
	// Progress, if not nil, is called once per iteration with the iteration number and the
	// relative residual the method has at hand: the recursively updated one for CG and BiCGStab,
	// the true one for SOR. It runs inside the loop and should be cheap.
	Progress func(iter int, residual float64)
}

// resolve returns a copy of s with defaults filled in; it panics on invalid values.
func (s *Settings) resolve(method string) Settings {
	var c Settings
	if s != nil {
		c = *s
	}
	if c.Tolerance < 0 || math.IsNaN(c.Tolerance) || math.IsInf(c.Tolerance, 0) {
		panic(fmt.Sprintf("solver: %s: Settings.Tolerance must be >= 0 and finite, got %g", method, c.Tolerance))
	}
	if c.MaxIterations < 0 {
		panic(fmt.Sprintf("solver: %s: Settings.MaxIterations must be >= 0, got %d", method, c.MaxIterations))
	}
	if c.Tolerance == 0 {
		c.Tolerance = DefaultTolerance
	}
	if c.MaxIterations == 0 {
		c.MaxIterations = DefaultMaxIterations
	}
	return c
}

// progress calls the Progress hook if there is one.
func (s *Settings) progress(iter int, residual float64) {
	if s.Progress != nil {
		s.Progress(iter, residual)
	}
}

// Stats records a solve.
type Stats struct {
	Method     string // "cg", "bicgstab" or "sor"
	Iterations int    // iterations done (SOR: sweeps; BiCGStab: steps with two operator products each)
	// Residual is the relative residual ‖b − A x‖₂ / ‖b‖₂ of the returned x, recomputed from
	// b − A x at the end (never the recursively updated estimate).
	Residual  float64
	Converged bool // Residual <= Tolerance
	// Restarts counts how often a Krylov method started afresh from the true residual: after a
	// near-breakdown or when the recursive residual passed the test but the true one did not.
	Restarts int
	// Floor reports a CG solve that stopped on the rounding floor of its residual (see
	// roundingFloor) above the tolerance: Converged is then true, as no further digit of x can
	// be had in float64, and Residual is above Tolerance.
	Floor bool
}

// cgStallLimit is how many successive restarts of CG may fail to halve the true residual before
// the solve is reported as stalled. One is enough: a restart is confirmed only once the recursive
// residual has passed the tolerance again, so a true residual that has not halved by then sits on
// its floor, and the floor is accepted only within the rounding bound (roundingFloor). Measured on
// the φ solve of a 16M-cell channel: 10 iterations with three restarts, 8 with one, the same
// residual (1.55e-10) either way.
const cgStallLimit = 1

// ErrNotConverged is returned, possibly wrapped, when a solve used up its iterations before the
// relative residual reached the tolerance, or stalled on its rounding floor. x then holds the best
// iterate found and Stats its true residual.
var ErrNotConverged = errors.New("solver: not converged")

// ErrBreakdown is returned, wrapped, when an iteration cannot continue: a value became NaN or
// infinite, a denominator vanished after a fresh restart, CG met a direction of non-positive
// curvature, or SOR diverged. The operator, preconditioner or input does not suit the method.
// x then holds the last finite iterate (BiCGStab: the best one) and Stats its true residual.
var ErrBreakdown = errors.New("solver: breakdown")

// breakdownCos is the smallest |cosine| between two vectors whose inner product BiCGStab divides
// by: below it, the inner product is treated as a breakdown and the method restarts. A computed
// inner product is uncertain by a few ε times the product of the norms, so a smaller cosine is
// rounding noise. (Measured: 1e-12 or above restarts needlessly often and slows BiCGStab on the
// Laplacian, 683 against 453 iterations on 191² unknowns; 1e-15 never restarts there.)
const breakdownCos = 1e-15

// isFinite reports whether v is neither NaN nor infinite.
func isFinite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// checkVectors panics unless b and x have length n.
func checkVectors(method string, n int, b, x []float64) {
	if len(b) != n || len(x) != n {
		panic(fmt.Sprintf("solver: %s: len(b) = %d and len(x) = %d, want the operator's length %d", method, len(b), len(x), n))
	}
}

// residualTo computes dst = b − A x and returns ‖dst‖₂. For a rangeOperator (*CSR, *GridMatrix)
// it uses one fused pass; the result is the same bit for bit.
func residualTo(a Operator, dst, b, x []float64) float64 {
	if c, ok := a.(rangeOperator); ok {
		return math.Sqrt(sumBlocks(c.Len(), func(lo, hi int) float64 { return c.residualRange(dst, b, x, lo, hi) }))
	}
	a.MulVecTo(dst, x)
	return math.Sqrt(sumBlocks(len(dst), func(lo, hi int) float64 {
		d := dst[lo:hi]
		bb := b[lo:hi]
		bb = bb[:len(d)]
		var sq float64
		for i, ax := range d {
			ri := bb[i] - ax
			d[i] = ri
			sq += ri * ri
		}
		return sq
	}))
}

// roundingFloor returns ‖(k+1)ε(|b| + |A||x|)‖₂, k the most entries in a row of A: the bound on
// the rounding error of b − A x computed in floating point (Higham, Accuracy and Stability of
// Numerical Algorithms, 2nd ed., 2002, §3.5, with γ_{k+1} ≈ (k+1)ε), so a true residual below
// it carries no information about x. It uses dst for |A||x| and reports false for an operator
// that is neither a *CSR nor a *GridMatrix.
func roundingFloor(a Operator, dst, b, x []float64) (float64, bool) {
	const eps = 0x1p-53
	if gm, ok := a.(*GridMatrix); ok {
		g := float64(gm.maxRowLen()+1) * eps
		return math.Sqrt(sumBlocks(gm.N, func(lo, hi int) float64 { return gm.absRange(dst, b, x, g, lo, hi) })), true
	}
	c, ok := a.(*CSR)
	if !ok {
		return 0, false
	}
	k := 0
	for i := range c.N {
		k = max(k, c.RowPtr[i+1]-c.RowPtr[i])
	}
	g := float64(k+1) * eps
	sq := sumBlocks(c.N, func(lo, hi int) float64 {
		var sq float64
		for i := lo; i < hi; i++ {
			s := math.Abs(b[i])
			for q := c.RowPtr[i]; q < c.RowPtr[i+1]; q++ {
				s += math.Abs(c.Val[q] * x[c.Col[q]])
			}
			dst[i] = g * s
			sq += dst[i] * dst[i]
		}
		return sq
	})
	return math.Sqrt(sq), true
}

// Workspace holds the work vectors of CG and BiCGStab, so that a sequence of solves allocates
// them once: the 1 + K superposition solves of SolvePsi share one. The zero value is an empty
// workspace; ReserveCG or ReserveBiCGStab sizes it beforehand, else the first solve does, and it
// keeps the memory of the largest solve it has served until it is garbage collected. Every vector a method uses is written before it is
// read, so a reused workspace gives the same results, bit for bit, as a fresh one (or as the
// functions CG and BiCGStab, which use a workspace of their own).
//
// Memory: CG keeps 3 vectors of the operator's length (the preconditioner's output shares the
// operator product's), BiCGStab 6 (7 with a preconditioner): the residual, the search direction
// and the operator's product, BiCGStab also the shadow residual, the second product and the best
// iterate (none when lastIterate is set), and with a preconditioner its output. A solve with a workspace that is large enough allocates nothing of grid size.
//
// A Workspace serves one solve at a time; its vectors never alias the caller's b and x.
type Workspace struct {
	buf []float64
	k   kernels // the parallel vector and matrix kernels (krylov_par.go)
	// lastIterate makes BiCGStab keep no best iterate: one vector less, and no copy of x in the
	// steps; a solve that does not converge then returns its last iterate. The bordered ψ
	// solve sets it (it converges in 4–6 steps, and the run stops on a failed solve anyway):
	// a 16M-cell channel maps 128 MB less.
	lastIterate bool
}

// cgVectors and bicgstabVectors return the number of work vectors of CG and BiCGStab, with or
// without a preconditioner.
func cgVectors(bool) int { return 3 }

func (w *Workspace) bicgstabVectors(precon bool) int {
	n := 6
	if precon {
		n++
	}
	if w.lastIterate {
		n--
	}
	return n
}

// ReserveCG grows w, if it is smaller, to the work vectors of a preconditioned CG solve of n
// unknowns (3n values), and maps the new memory in at once. The solves that follow then neither
// allocate nor meet fresh pages, so the cost of the memory falls on the setup that calls Reserve,
// not on the first solve. It panics if n is negative.
func (w *Workspace) ReserveCG(n int) {
	if n < 0 {
		panic(fmt.Sprintf("solver: Workspace.ReserveCG: n must be >= 0, got %d", n))
	}
	w.reserve(cgVectors(true) * n)
}

// ReserveBiCGStab is ReserveCG for a preconditioned BiCGStab solve (7n values, 6n for a
// workspace that keeps no best iterate), which is also enough for CG.
func (w *Workspace) ReserveBiCGStab(n int) {
	if n < 0 {
		panic(fmt.Sprintf("solver: Workspace.ReserveBiCGStab: n must be >= 0, got %d", n))
	}
	w.reserve(w.bicgstabVectors(true) * n)
}

// reserve grows w to size values and touches the new memory.
func (w *Workspace) reserve(size int) {
	if w.grow(size) {
		pages.Touch(w.buf)
	}
}

// grow makes w hold at least size values and reports whether it allocated. A workspace that is
// too small is replaced, not extended: its contents need not survive.
func (w *Workspace) grow(size int) bool {
	if len(w.buf) >= size {
		return false
	}
	w.buf = make([]float64, size)
	return true
}

// vector returns work vector i of length n; its capacity ends where vector i + 1 begins.
func (w *Workspace) vector(i, n int) []float64 {
	return w.buf[i*n : (i+1)*n : (i+1)*n]
}

// CG solves A x = b by the conjugate gradient method, preconditioned by m when m is not nil
// (Saad 2003, ch. 6 and 9). A and M must be symmetric positive definite. x holds the initial
// guess on entry and the solution on return.
//
// The solve stops when the recursively updated relative residual ‖r‖/‖b‖ reaches the tolerance
// and the true residual ‖b − A x‖/‖b‖, then recomputed, confirms it; when it does not, CG
// restarts from the true residual; after cgStallLimit such restarts in a row that do not halve the
// true residual it stops: converged with Stats.Floor set when the true residual lies within the
// rounding error of computing it (roundingFloor), which happens on fine grids whose ‖b‖ is small
// beside ‖A‖‖x‖, and ErrNotConverged otherwise (the tolerance lies below what x can give). If
// ‖b‖ = 0, x is set to 0 and CG returns at once.
//
// Errors: ErrNotConverged (wrapped) after MaxIterations; ErrBreakdown (wrapped) on p·Ap ≤ 0,
// r·M⁻¹r ≤ 0 or a non-finite value; ctx.Err() (wrapped) when ctx is done, checked every
// iteration; a preconditioner's error (wrapped). In every case x holds the last finite iterate
// and Stats its true residual. CG panics if b or x does not have length a.Len().
func CG(ctx context.Context, a Operator, b, x []float64, m Preconditioner, s *Settings) (Stats, error) {
	var w Workspace
	return w.CG(ctx, a, b, x, m, s)
}

// CG is the function CG with its work vectors taken from w, which grows if it is too small; the
// results are the same bit for bit.
func (w *Workspace) CG(ctx context.Context, a Operator, b, x []float64, m Preconditioner, s *Settings) (Stats, error) {
	const method = "cg"
	cfg := s.resolve(method)
	n := a.Len()
	checkVectors(method, n, b, x)
	st := Stats{Method: method}

	bnorm := w.k.norm(b)
	if bnorm == 0 {
		clear(x)
		st.Converged = true
		return st, nil
	}
	if !isFinite(bnorm) {
		return st, fmt.Errorf("%w: %s: right-hand side has a non-finite entry or overflows ‖b‖", ErrBreakdown, method)
	}

	w.grow(cgVectors(m != nil) * n)
	r := w.vector(0, n) // residual b − A x
	p := w.vector(1, n) // search direction
	q := w.vector(2, n) // A p
	// z is the preconditioned residual M⁻¹ r: r itself when there is no preconditioner, else q's
	// storage, as q = A p is spent by the step r −= α q before z is formed and z by p = z + β p
	// before the next q.
	z := r
	if m != nil {
		z = q
	}

	// finish recomputes the true residual of x (into q, no longer needed) for a solve that ends
	// without converging.
	finish := func(err error) (Stats, error) {
		st.Residual = w.k.residual(a, q, b, x) / bnorm
		st.Converged = false
		return st, err
	}

	rnorm := w.k.residual(a, r, b, x)
	if !isFinite(rnorm) {
		return st, fmt.Errorf("%w: %s: initial residual is not finite (check x and the operator)", ErrBreakdown, method)
	}
	if rnorm/bnorm <= cfg.Tolerance {
		st.Residual = rnorm / bnorm
		st.Converged = true
		return st, nil
	}

	// start sets z = M⁻¹ r, p = z and returns ρ = r·z, the first step of PCG from the residual r.
	start := func() (float64, error) {
		if m != nil {
			if err := m.PreconSolve(z, r); err != nil {
				return 0, fmt.Errorf("solver: %s: preconditioner: %w", method, err)
			}
		}
		w.k.copy(p, z)
		return w.k.dot(r, z), nil
	}
	rho, err := start()
	if err != nil {
		return finish(err)
	}
	if !(rho > 0) || !isFinite(rho) {
		return finish(fmt.Errorf("%w: %s: r·M⁻¹r = %g is not positive: the preconditioner is not positive definite", ErrBreakdown, method, rho))
	}

	stalls, lastTrue := 0, math.Inf(1)
	for it := 1; it <= cfg.MaxIterations; it++ {
		if err := ctx.Err(); err != nil {
			return finish(fmt.Errorf("solver: %s stopped after %d iterations: %w", method, st.Iterations, err))
		}
		// q = A p, α = ρ / (p·A p)
		pq, _ := w.k.mulVecDots2(a, q, p, p)
		if !(pq > 0) || !isFinite(pq) {
			return finish(fmt.Errorf("%w: %s: p·Ap = %g at iteration %d: the operator is not positive definite", ErrBreakdown, method, pq, it))
		}
		alpha := rho / pq
		if !isFinite(alpha) {
			return finish(fmt.Errorf("%w: %s: step length %g at iteration %d", ErrBreakdown, method, alpha, it))
		}
		// x += α p, r −= α q
		rr := w.k.step(x, r, alpha, p, q)
		st.Iterations = it
		res := math.Sqrt(rr) / bnorm
		if !isFinite(res) {
			return finish(fmt.Errorf("%w: %s: residual %g at iteration %d", ErrBreakdown, method, res, it))
		}
		cfg.progress(it, res)

		if res <= cfg.Tolerance {
			// Confirm with the true residual, which also replaces the drifted recursive one.
			trueRes := w.k.residual(a, r, b, x) / bnorm
			if trueRes <= cfg.Tolerance {
				st.Residual = trueRes
				st.Converged = true
				return st, nil
			}
			// The recursive residual passed and the true one did not. If that keeps happening
			// without the true residual halving, the solve sits on its rounding floor: report
			// it as not converged rather than restart until the iteration limit.
			if trueRes > 0.5*lastTrue {
				stalls++
			} else {
				stalls = 0
			}
			lastTrue = trueRes
			if stalls >= cgStallLimit {
				if floor, ok := roundingFloor(a, q, b, x); ok && trueRes <= floor/bnorm {
					st.Residual = trueRes
					st.Converged, st.Floor = true, true
					return st, nil
				}
				return finish(fmt.Errorf("%w: %s: the true residual stays at %.3g above the tolerance %.3g (rounding floor) after %d restarts", ErrNotConverged, method, trueRes, cfg.Tolerance, st.Restarts))
			}
			st.Restarts++
			if rho, err = start(); err != nil {
				return finish(err)
			}
			if !(rho > 0) || !isFinite(rho) {
				return finish(fmt.Errorf("%w: %s: r·M⁻¹r = %g at iteration %d: the preconditioner is not positive definite", ErrBreakdown, method, rho, it))
			}
			continue
		}

		// z = M⁻¹ r, β = (r·z)_new / (r·z)_old, p = z + β p
		rhoNew := rr
		if m != nil {
			if err := m.PreconSolve(z, r); err != nil {
				return finish(fmt.Errorf("solver: %s: preconditioner at iteration %d: %w", method, it, err))
			}
			rhoNew = w.k.dot(r, z)
		}
		if !(rhoNew > 0) || !isFinite(rhoNew) {
			return finish(fmt.Errorf("%w: %s: r·M⁻¹r = %g at iteration %d: the preconditioner is not positive definite", ErrBreakdown, method, rhoNew, it))
		}
		beta := rhoNew / rho
		rho = rhoNew
		w.k.cgDirection(p, z, beta)
	}
	st, _ = finish(nil)
	return st, fmt.Errorf("%w: %s: relative residual %.3g after %d iterations, want <= %.3g",
		ErrNotConverged, method, st.Residual, st.Iterations, cfg.Tolerance)
}

// BiCGStab solves A x = b for a general (non-symmetric) non-singular A by van der Vorst's
// BiCGStab (van der Vorst 1992; Saad 2003, ch. 7), right-preconditioned by m when m is not
// nil: it iterates on A M⁻¹ y = b with x = M⁻¹ y. x holds the initial guess on entry and the
// solution on return.
//
// Each step is a BiCG half step followed by a one-dimensional minimal-residual step. The
// recursion divides by ρ = r̂·r, by r̂·A p̂ and uses ω = (t·s)/(t·t); when one of these nearly
// vanishes (|cosine| below 1e-15, the rounding level) the method restarts from the true
// residual with r̂ = r. A breakdown right after a fresh start cannot be cured by restarting and
// is reported as ErrBreakdown. Convergence is tested on the recursive residual and confirmed on the true one;
// if the true one fails the test, BiCGStab restarts. If ‖b‖ = 0, x is set to 0 and BiCGStab
// returns at once.
//
// Errors are those of CG. When the solve does not converge, x holds whichever of the last iterate
// and the iterate of smallest recursive residual has the smaller true residual.
func BiCGStab(ctx context.Context, a Operator, b, x []float64, m Preconditioner, s *Settings) (Stats, error) {
	var w Workspace
	return w.BiCGStab(ctx, a, b, x, m, s)
}

// BiCGStab is the function BiCGStab with its work vectors taken from w, which grows if it is too
// small; the results are the same bit for bit.
func (w *Workspace) BiCGStab(ctx context.Context, a Operator, b, x []float64, m Preconditioner, s *Settings) (Stats, error) {
	const method = "bicgstab"
	cfg := s.resolve(method)
	n := a.Len()
	checkVectors(method, n, b, x)
	st := Stats{Method: method}

	bnorm := w.k.norm(b)
	if bnorm == 0 {
		clear(x)
		st.Converged = true
		return st, nil
	}
	if !isFinite(bnorm) {
		return st, fmt.Errorf("%w: %s: right-hand side has a non-finite entry or overflows ‖b‖", ErrBreakdown, method)
	}

	w.grow(w.bicgstabVectors(m != nil) * n)
	r := w.vector(0, n)    // residual; holds s = r − α v between the half steps
	rhat := w.vector(1, n) // shadow residual r̂
	p := w.vector(2, n)    // search direction
	v := w.vector(3, n)    // A M⁻¹ p
	t := w.vector(4, n)    // A M⁻¹ s
	var xBest []float64
	next := 5
	if !w.lastIterate {
		xBest = w.vector(next, n)
		next++
	}
	var z []float64 // M⁻¹ p, then M⁻¹ s
	if m != nil {
		z = w.vector(next, n)
	}

	rnorm := w.k.residual(a, r, b, x)
	if !isFinite(rnorm) {
		return st, fmt.Errorf("%w: %s: initial residual is not finite (check x and the operator)", ErrBreakdown, method)
	}
	if rnorm/bnorm <= cfg.Tolerance {
		st.Residual = rnorm / bnorm
		st.Converged = true
		return st, nil
	}
	// xBest holds the iterate of smallest recursive residual, bestRes, unless bestInX: then x
	// is that iterate, and the next step that moves x saves it in the same pass. Without xBest
	// (lastIterate), x is all there is.
	bestInX := true
	bestRes := rnorm / bnorm

	// finish puts into x the better (by true residual) of x and xBest and records its residual.
	finish := func(err error) (Stats, error) {
		res := w.k.residual(a, t, b, x) / bnorm
		if xBest != nil && !bestInX && (bestRes < res || !isFinite(res)) {
			if bres := w.k.residual(a, t, b, xBest) / bnorm; bres < res || !isFinite(res) {
				w.k.copy(x, xBest)
				res = bres
			}
		}
		st.Residual = res
		st.Converged = false
		return st, err
	}
	// precon returns M⁻¹ y (in z), or y itself without a preconditioner.
	precon := func(y []float64, it int) ([]float64, error) {
		if m == nil {
			return y, nil
		}
		if err := m.PreconSolve(z, y); err != nil {
			return nil, fmt.Errorf("solver: %s: preconditioner at iteration %d: %w", method, it, err)
		}
		return z, nil
	}

	fresh := true // start (again) from r with r̂ = r, p = r
	var rho, rhoPrev, alpha, omega, rhatNorm float64
	var rhoNext float64 // r̂·r of the residual the last step left, summed with that step
	for it := 1; it <= cfg.MaxIterations; it++ {
		if err := ctx.Err(); err != nil {
			return finish(fmt.Errorf("solver: %s stopped after %d iterations: %w", method, st.Iterations, err))
		}
		st.Iterations = it

		// ρ = r̂·r; p = r + β (p − ω v), β = (ρ/ρ_prev)(α/ω)
		if !fresh {
			rho = rhoNext
			if !isFinite(rho) {
				return finish(fmt.Errorf("%w: %s: r̂·r = %g at iteration %d", ErrBreakdown, method, rho, it))
			}
			if math.Abs(rho) <= breakdownCos*rhatNorm*rnorm {
				st.Restarts++
				rnorm = w.k.residual(a, r, b, x)
				fresh = true
			}
		}
		startedFresh := fresh
		if fresh {
			w.k.copy(rhat, r)
			w.k.copy(p, r)
			rhatNorm = rnorm
			rho = w.k.dot(rhat, r)
			fresh = false
		} else {
			beta := (rho / rhoPrev) * (alpha / omega)
			if !isFinite(beta) {
				return finish(fmt.Errorf("%w: %s: β = %g at iteration %d", ErrBreakdown, method, beta, it))
			}
			w.k.bicgDirection(p, r, v, beta, omega)
		}

		// p̂ = M⁻¹ p, v = A p̂, α = ρ / (r̂·v)
		phat, err := precon(p, it)
		if err != nil {
			return finish(err)
		}
		rv, vv := w.k.mulVecDots2(a, v, phat, rhat)
		if !isFinite(rv) || !isFinite(vv) {
			return finish(fmt.Errorf("%w: %s: r̂·Ap̂ = %g at iteration %d", ErrBreakdown, method, rv, it))
		}
		if math.Abs(rv) <= breakdownCos*rhatNorm*math.Sqrt(vv) {
			if startedFresh {
				return finish(fmt.Errorf("%w: %s: r·AM⁻¹r = %g right after a fresh start at iteration %d: the operator does not suit BiCGStab", ErrBreakdown, method, rv, it))
			}
			st.Restarts++
			rnorm = w.k.residual(a, r, b, x)
			fresh = true
			cfg.progress(it, rnorm/bnorm)
			continue
		}
		alpha = rho / rv
		if !isFinite(alpha) {
			return finish(fmt.Errorf("%w: %s: α = %g at iteration %d", ErrBreakdown, method, alpha, it))
		}

		// x += α p̂, s = r − α v (stored in r)
		var ss float64
		if bestInX && xBest != nil {
			ss = w.k.stepSave(x, r, alpha, phat, v, xBest)
			bestInX = false
		} else {
			ss = w.k.step(x, r, alpha, phat, v)
		}
		sres := math.Sqrt(ss) / bnorm
		if !isFinite(sres) {
			return finish(fmt.Errorf("%w: %s: residual %g at iteration %d", ErrBreakdown, method, sres, it))
		}
		if sres <= cfg.Tolerance {
			rnorm = w.k.residual(a, r, b, x)
			cfg.progress(it, rnorm/bnorm)
			if rnorm/bnorm <= cfg.Tolerance {
				st.Residual = rnorm / bnorm
				st.Converged = true
				return st, nil
			}
			st.Restarts++
			fresh = true
			continue
		}

		// ŝ = M⁻¹ s, t = A ŝ, ω = (t·s)/(t·t)
		shat, err := precon(r, it)
		if err != nil {
			return finish(err)
		}
		ts, tt := w.k.mulVecDots2(a, t, shat, r)
		if !isFinite(ts) || !isFinite(tt) {
			return finish(fmt.Errorf("%w: %s: t·s = %g, t·t = %g at iteration %d", ErrBreakdown, method, ts, tt, it))
		}
		if tt == 0 || math.Abs(ts) <= breakdownCos*math.Sqrt(tt)*math.Sqrt(ss) {
			// ω ≈ 0: keep the half step (x already holds it) and restart from its residual.
			st.Restarts++
			rnorm = w.k.residual(a, r, b, x)
			fresh = true
			cfg.progress(it, rnorm/bnorm)
			continue
		}
		omega = ts / tt

		// x += ω ŝ, r = s − ω t, and r̂·r for the next iteration
		rr, rhoRR := w.k.stepDot(x, r, omega, shat, t, rhat)
		rnorm, rhoNext = math.Sqrt(rr), rhoRR
		res := rnorm / bnorm
		if !isFinite(res) {
			return finish(fmt.Errorf("%w: %s: residual %g at iteration %d", ErrBreakdown, method, res, it))
		}
		cfg.progress(it, res)
		if res < bestRes {
			bestInX = true
			bestRes = res
		}
		if res <= cfg.Tolerance {
			rnorm = w.k.residual(a, r, b, x)
			if rnorm/bnorm <= cfg.Tolerance {
				st.Residual = rnorm / bnorm
				st.Converged = true
				return st, nil
			}
			st.Restarts++
			fresh = true
			continue
		}
		rhoPrev = rho
	}
	st, _ = finish(nil)
	return st, fmt.Errorf("%w: %s: relative residual %.3g after %d iterations, want <= %.3g",
		ErrNotConverged, method, st.Residual, st.Iterations, cfg.Tolerance)
}

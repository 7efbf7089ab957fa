package solver

import (
	"context"
	"fmt"
	"math"
)

// SOR is red-black successive over-relaxation on a CSR matrix whose rows split into two colours
// that do not couple within a colour: A_ij = 0 whenever i ≠ j have the same colour. This holds for
// 5-point stencils, Shortley-Weller rows included, with red = nodes of even i+j. One sweep updates
// every red row and then every black row by
//
//	x_i ← x_i + ω (b_i − Σ_j A_ij x_j) / A_ii
//
// (Young 1950; Saad 2003, ch. 4). Because no row couples to another of its colour,
// the rows of one colour may be updated in any order, or at once, with the same result.
type SOR struct {
	Omega      float64 // relaxation factor in (0, 2); 0 means 1 (Gauss-Seidel)
	Red, Black []int32 // row indices of each colour; together every row exactly once
}

// divergenceFactor is the growth of the relative residual over max(1, initial) at which SOR
// gives up as diverging, long before values overflow.
const divergenceFactor = 1e100

// Solve solves A x = b by red-black SOR sweeps; x holds the initial guess on entry and the
// solution on return. The settings are those of the Krylov methods; an iteration is one sweep.
//
// The residual costs nothing extra: the residual r_i = b_i − (A x)_i that a red row computes for
// its update is that of the previous iterate, and a black row's residual after its own update is
// exactly (1 − ω) r_i, because no other black row couples to it. So the true relative residual of
// sweep k is known during sweep k + 1 and is what Progress receives. When it reaches the tolerance
// Solve finishes that sweep, recomputes the residual of the new iterate and stops if it passes.
//
// Errors: ErrNotConverged (wrapped) after MaxIterations, ErrBreakdown (wrapped) when the
// iteration diverges, ctx.Err() (wrapped) when ctx is done, checked every sweep. Solve panics if
// the lengths do not match, Omega is outside (0, 2), the colours do not partition the rows, two
// rows of one colour couple, or a diagonal entry is zero.
func (s *SOR) Solve(ctx context.Context, a *CSR, b, x []float64, set *Settings) (Stats, error) {
	const method = "sor"
	cfg := set.resolve(method)
	checkVectors(method, a.N, b, x)
	omega := s.Omega
	if omega == 0 {
		omega = 1
	}
	if !(omega > 0 && omega < 2) {
		panic(fmt.Sprintf("solver: SOR.Solve: Omega must be in (0, 2), got %g", s.Omega))
	}
	invDiag := s.check(a)
	st := Stats{Method: method}

	bnorm := norm(b)
	if bnorm == 0 {
		clear(x)
		st.Converged = true
		return st, nil
	}
	if !isFinite(bnorm) {
		return st, fmt.Errorf("%w: %s: right-hand side has a non-finite entry or overflows ‖b‖", ErrBreakdown, method)
	}
	trueRes := func() float64 {
		return math.Sqrt(sumBlocks(a.N, func(lo, hi int) float64 { return a.residualSqRange(b, x, lo, hi) })) / bnorm
	}
	finish := func(err error) (Stats, error) {
		st.Residual = trueRes()
		st.Converged = false
		return st, err
	}

	res0 := trueRes()
	if !isFinite(res0) {
		return st, fmt.Errorf("%w: %s: initial residual is not finite (check x)", ErrBreakdown, method)
	}
	if res0 <= cfg.Tolerance {
		st.Residual = res0
		st.Converged = true
		return st, nil
	}
	limit := divergenceFactor * max(1, res0)

	damp := (1 - omega) * (1 - omega) // black residuals shrink by (1 − ω) in their own update
	var blackSq float64               // Σ r_i² of the black rows before their update in the last sweep
	reported := 0                     // last iteration passed to Progress
	for k := 1; k <= cfg.MaxIterations; k++ {
		if err := ctx.Err(); err != nil {
			return finish(fmt.Errorf("solver: %s stopped after %d sweeps: %w", method, st.Iterations, err))
		}
		redSq := a.sorSweep(s.Red, invDiag, b, x, omega)
		check := false
		if k > 1 {
			// ‖b − A x_{k−1}‖² = Σ_red r_i² + (1 − ω)² Σ_black r_i²
			res := math.Sqrt(redSq+damp*blackSq) / bnorm
			if !isFinite(res) || res > limit {
				st.Iterations = k
				return finish(fmt.Errorf("%w: %s: diverging, relative residual %.3g at sweep %d", ErrBreakdown, method, res, k-1))
			}
			if reported < k-1 {
				cfg.progress(k-1, res)
				reported = k - 1
			}
			check = res <= cfg.Tolerance
		}
		blackSq = a.sorSweep(s.Black, invDiag, b, x, omega)
		st.Iterations = k
		if check {
			res := trueRes()
			cfg.progress(k, res)
			reported = k
			if res <= cfg.Tolerance {
				st.Residual = res
				st.Converged = true
				return st, nil
			}
		}
	}
	st, _ = finish(nil)
	return st, fmt.Errorf("%w: %s: relative residual %.3g after %d sweeps, want <= %.3g",
		ErrNotConverged, method, st.Residual, st.Iterations, cfg.Tolerance)
}

// check panics unless s's colours partition a's rows and no two rows of one colour couple, and
// returns the inverse diagonal of a.
func (s *SOR) check(a *CSR) []float64 {
	if len(s.Red)+len(s.Black) != a.N {
		panic(fmt.Sprintf("solver: SOR: %d red and %d black rows, want %d in all", len(s.Red), len(s.Black), a.N))
	}
	colour := make([]int8, a.N) // 0 unset, 1 red, 2 black
	for c, rows := range [][]int32{s.Red, s.Black} {
		for _, i := range rows {
			if i < 0 || int(i) >= a.N {
				panic(fmt.Sprintf("solver: SOR: row index must be in [0, %d), got %d", a.N, i))
			}
			if colour[i] != 0 {
				panic(fmt.Sprintf("solver: SOR: row %d listed twice", i))
			}
			colour[i] = int8(c + 1)
		}
	}
	inv := make([]float64, a.N)
	for i := range a.N {
		for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
			j, v := a.Col[k], a.Val[k]
			if !isFinite(v) {
				panic(fmt.Sprintf("solver: SOR: entry (%d, %d) must be finite, got %g", i, j, v))
			}
			switch {
			case int(j) == i:
				inv[i] = v
			case v != 0 && colour[j] == colour[i]:
				panic(fmt.Sprintf("solver: SOR: rows %d and %d have the same colour but couple (A_ij = %g)", i, j, v))
			}
		}
		if inv[i] == 0 {
			panic(fmt.Sprintf("solver: SOR: diagonal entry %d must be non-zero", i))
		}
		inv[i] = 1 / inv[i]
	}
	return inv
}

// sorSweep relaxes the given rows (all of one colour) and returns the sum of their squared
// residuals before the update, reduced over fixed blocks of the row list.
func (a *CSR) sorSweep(rows []int32, invDiag, b, x []float64, omega float64) float64 {
	return sumBlocks(len(rows), func(lo, hi int) float64 { return a.sorRange(rows[lo:hi], invDiag, b, x, omega) })
}

// sorRange relaxes the listed rows: r_i = b_i − Σ_j A_ij x_j, x_i += ω r_i / A_ii, and returns
// Σ r_i². The rows must not couple to each other.
func (a *CSR) sorRange(rows []int32, invDiag, b, x []float64, omega float64) float64 {
	var sq float64
	for _, i := range rows {
		start, end := a.RowPtr[i], a.RowPtr[i+1]
		ri := b[i] - rowDot(a.Col[start:end], a.Val[start:end], x)
		sq += ri * ri
		x[i] += omega * ri * invDiag[i]
	}
	return sq
}

// OptimalOmega returns Young's optimal relaxation factor for SOR on the 5-point Laplacian of a
// Dirichlet rectangle of nx × ny cells (nx − 1 by ny − 1 unknowns):
//
//	ω = 2 / (1 + √(1 − ρ_J²)),  ρ_J = (cos(π/nx) + cos(π/ny)) / 2,
//
// with ρ_J the spectral radius of the Jacobi iteration (Young 1950; Varga 1962, ch. 4). On
// other domains of about that size it is a good first guess. It panics if nx or ny is below 2.
func OptimalOmega(nx, ny int) float64 {
	if nx < 2 || ny < 2 {
		panic(fmt.Sprintf("solver: OptimalOmega: nx and ny must be >= 2, got %d and %d", nx, ny))
	}
	// 1 − ρ_J = sin²(π/2nx) + sin²(π/2ny), free of the cancellation in 1 − cos for large grids;
	// then 1 − ρ_J² = (1 − ρ_J)(1 + ρ_J).
	sx, sy := math.Sin(math.Pi/float64(2*nx)), math.Sin(math.Pi/float64(2*ny))
	oneMinus := sx*sx + sy*sy
	return 2 / (1 + math.Sqrt(oneMinus*(2-oneMinus)))
}

// OptimalOmegaChannel is OptimalOmega for the φ problem of a channel nx cells long: the value
// is prescribed at the outlet only, and the inlet, the walls and the bodies carry a flux. The
// slowest Jacobi mode is then a quarter sine along the channel and constant across it, so
//
//	1 − ρ_J = (1 − cos(π/2nx)) / 2 = sin²(π/4nx),
//
// (the one-dimensional mixed Dirichlet–Neumann spectrum, Varga 1962, ch. 4, with the Neumann
// direction's lowest mode 0) and ω = 2 / (1 + √(1 − ρ_J²)). The Dirichlet rectangle's ω would
// relax such a problem several times too weakly. It panics if nx is below 2.
func OptimalOmegaChannel(nx int) float64 {
	if nx < 2 {
		panic(fmt.Sprintf("solver: OptimalOmegaChannel: nx must be >= 2, got %d", nx))
	}
	sx := math.Sin(math.Pi / float64(4*nx))
	oneMinus := sx * sx
	return 2 / (1 + math.Sqrt(oneMinus*(2-oneMinus)))
}

// RedBlack splits the rows of a into two colours such that no entry A_ij ≠ 0 with i ≠ j joins
// rows of one colour (in either direction), for use as SOR.Red and SOR.Black. In each connected
// group of rows the lowest-numbered row is red. It returns an error if no such split exists (the
// coupling graph has an odd cycle, as 9-point stencils do).
func RedBlack(a *CSR) (red, black []int32, err error) {
	n := a.N
	// Transposed pattern, so that couplings are followed in both directions.
	tPtr := make([]int, n+1)
	for _, j := range a.Col {
		tPtr[j+1]++
	}
	for i := range n {
		tPtr[i+1] += tPtr[i]
	}
	tCol := make([]int32, len(a.Col))
	tVal := make([]float64, len(a.Col)) // values too, so that explicit zeros can be skipped
	next := append([]int(nil), tPtr[:n]...)
	for i := range n {
		for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
			j := a.Col[k]
			tCol[next[j]] = int32(i)
			tVal[next[j]] = a.Val[k]
			next[j]++
		}
	}

	colour := make([]int8, n) // 0 unset, 1 red, 2 black
	queue := make([]int32, 0, n)
	for root := range n {
		if colour[root] != 0 {
			continue
		}
		colour[root] = 1
		queue = append(queue[:0], int32(root))
		for len(queue) > 0 {
			i := queue[0]
			queue = queue[1:]
			visit := func(j int32, v float64) error {
				if j == i || v == 0 {
					return nil
				}
				switch colour[j] {
				case 0:
					colour[j] = 3 - colour[i]
					queue = append(queue, j)
				case colour[i]:
					return fmt.Errorf("solver: red-black colouring: rows %d and %d couple but are joined by an odd cycle of couplings", i, j)
				}
				return nil
			}
			for k := a.RowPtr[i]; k < a.RowPtr[i+1]; k++ {
				if err := visit(a.Col[k], a.Val[k]); err != nil {
					return nil, nil, err
				}
			}
			for k := tPtr[i]; k < tPtr[i+1]; k++ {
				if err := visit(tCol[k], tVal[k]); err != nil {
					return nil, nil, err
				}
			}
		}
	}
	for i, c := range colour {
		if c == 1 {
			red = append(red, int32(i))
		} else {
			black = append(black, int32(i))
		}
	}
	return red, black, nil
}

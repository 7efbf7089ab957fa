package solver

import (
	"context"
	"errors"
	"fmt"
	"math"
	"slices"
	"time"

	"gonum.org/v1/gonum/mat"

	"phipsi/bc"
	"phipsi/internal/pages"
	"phipsi/internal/par"
	"phipsi/mesh"
)

// PsiSystem is the discrete stream-function problem of one mesh and one set of boundary
// conditions: A x = B0 + Σ_k C_k·BK[k], where x holds ψ at the unknown nodes and C_k is body k's
// (yet unknown) constant ψ.
//
// Rows are the Shortley–Weller five-point Laplacian (Shortley & Weller, J. Appl. Phys. 9, 1938),
// scaled by −H²: with arms θ_E, θ_W, θ_N, θ_S (fractions of H) to the neighbour or to the boundary,
//
//	−H²·∂²ψ/∂x² ≈ 2ψ₀/(θ_E θ_W) − 2ψ_E/(θ_E(θ_E+θ_W)) − 2ψ_W/(θ_W(θ_E+θ_W)),
//
// and likewise in y. The matrix is a non-symmetric M-matrix; its solution and wall gradients are
// second order (Yoon & Min, J. Sci. Comput. 67, 2016). On the outlet column ∂ψ/∂x = 0 is imposed
// by mirroring the west arm (ψ_E = ψ_W at the same distance). Inlet nodes are Dirichlet
// (uniform inflow), pinned nodes take their boundary's value.
type PsiSystem struct {
	Mesh *mesh.Mesh
	BC   *bc.Set
	A    *GridMatrix
	// Unknown maps a node to its unknown index, −1 for a node whose ψ is known.
	Unknown []int32
	// Nodes maps an unknown index back to its node.
	Nodes []int32
	B0    []float64 // right-hand side with every body at ψ = 0 (with capacity for K more rows)
	// BK is the right-hand side of body k at ψ = 1 with everything else at 0. It is non-zero only
	// in the rows next to the body, so it is stored by those entries.
	BK []SparseVector
}

// SparseVector is a vector of length N that stores only its non-zero entries: Val[q] at index
// Index[q], with Index strictly increasing.
type SparseVector struct {
	N     int
	Index []int32
	Val   []float64
}

// DenseTo writes v into dst, the zeros included. It panics if len(dst) is not v.N.
func (v *SparseVector) DenseTo(dst []float64) {
	if len(dst) != v.N {
		panic(fmt.Sprintf("solver: SparseVector.DenseTo: len(dst) = %d, want %d", len(dst), v.N))
	}
	clear(dst)
	for q, i := range v.Index {
		dst[i] = v.Val[q]
	}
}

// add adds c to entry i, which must not lie before the last stored entry.
func (v *SparseVector) add(i int, c float64) {
	last := len(v.Index) - 1
	switch {
	case last >= 0 && int(v.Index[last]) == i:
		v.Val[last] += c
	case last < 0 || int(v.Index[last]) < i:
		v.Index = append(v.Index, int32(i))
		v.Val = append(v.Val, c)
	default:
		panic(fmt.Sprintf("solver: SparseVector.add: index %d after %d", i, v.Index[last]))
	}
}

// Release drops the matrix and the right-hand sides, which only the solves use, so that a run can
// reuse their memory for the next stage; the maps, the mesh and the conditions stay, which is all
// that deriving the flow from a solution needs. SolvePsi refuses a released system.
func (sys *PsiSystem) Release() {
	sys.A, sys.B0, sys.BK = nil, nil, nil
}

// AssemblePsi builds the ψ system of mesh m under conditions s.
func AssemblePsi(m *mesh.Mesh, s *bc.Set) (*PsiSystem, error) {
	g := m.Grid
	nb := len(m.Geom.Bodies)
	sys := &PsiSystem{Mesh: m, BC: s, Unknown: pages.Make[int32](g.Len())}
	// Unknowns: the fluid nodes but for the inlet column (and the outlet column under Outer).
	sys.Nodes = numberUnknowns(g, sys.Unknown, func(k int) int {
		i := k % g.NX
		if i == 0 || m.Kind[k] != mesh.Fluid || (s.Outer != nil && i == g.NX-1) {
			return 0
		}
		return 1
	})
	n := len(sys.Nodes)
	if n == 0 {
		return nil, fmt.Errorf("solver: the mesh has no fluid nodes")
	}
	if s.Prescribed != nil {
		nb = 0
	}
	// Room for the bodies' conditions after the rows, where the bordered solve puts them.
	sys.B0 = pages.Make[float64](n + nb)[:n]
	sys.BK = make([]SparseVector, nb)
	for b := range sys.BK {
		sys.BK[b].N = n
	}
	// Each row writes its own entry of B0 and its range's part of each BK, so the rows can be
	// built on several goroutines (buildRows); the parts are joined in range order.
	nr := rowRanges(n)
	bkParts := make([][]SparseVector, nr)
	for r := range bkParts {
		bkParts[r] = make([]SparseVector, len(sys.BK))
	}
	a, err := buildRows(g, sys.Nodes, sys.Unknown, nr, func(bld *GridBuilder, r, row int) error {
		bk := bkParts[r]
		k := int(sys.Nodes[row])
		i, j := k%g.NX, k/g.NX
		arms, cut := m.Arms(k)
		if psiPlainRows && !cut && i < g.NX-1 && bld.EndPlainRow() {
			// Four whole arms to nodes with unknowns (EndPlainRow checks them): the general
			// path below would store c = 1 to each and 4 on the diagonal, and add nothing to
			// the right-hand sides.
			return nil
		}
		var c [4]float64
		var diag float64
		// x direction: the outlet column mirrors its west arm.
		tE, tW := arms[mesh.East].Theta, arms[mesh.West].Theta
		if i == g.NX-1 && s.Outer == nil {
			c[mesh.West] = 2 / (tW * tW)
			diag += 2 / (tW * tW)
		} else {
			c[mesh.East] = 2 / (tE * (tE + tW))
			c[mesh.West] = 2 / (tW * (tE + tW))
			diag += 2 / (tE * tW)
		}
		tN, tS := arms[mesh.North].Theta, arms[mesh.South].Theta
		c[mesh.North] = 2 / (tN * (tN + tS))
		c[mesh.South] = 2 / (tS * (tN + tS))
		diag += 2 / (tN * tS)
		bld.Add(row, diag)
		steps := [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
		for d := range 4 {
			if c[d] == 0 {
				continue
			}
			arm := arms[d]
			if arm.Boundary != mesh.NoBoundary {
				end := g.At(i, j).Add(mesh.Point{X: float64(steps[d][0]), Y: float64(steps[d][1])}.Scale(arm.Theta * g.H))
				sys.addKnown(bk, row, c[d], arm.Boundary, end)
				continue
			}
			ni, nj := i+steps[d][0], j+steps[d][1]
			nk := g.Index(ni, nj)
			switch {
			case sys.Unknown[nk] >= 0:
				bld.Add(int(sys.Unknown[nk]), -c[d])
			case m.Kind[nk] == mesh.Pinned:
				sys.addKnown(bk, row, c[d], int(m.Owner[nk]), g.At(ni, nj))
			case m.Kind[nk] == mesh.Fluid: // an inlet node, or an outlet node under Outer
				sys.B0[row] += c[d] * sys.knownNode(ni, nj)
			default:
				return fmt.Errorf("solver: node (%d, %d) has a whole link to a node without a value", i, j)
			}
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	sys.A = a
	for b := range sys.BK {
		for _, part := range bkParts {
			sys.BK[b].Index = append(sys.BK[b].Index, part[b].Index...)
			sys.BK[b].Val = append(sys.BK[b].Val, part[b].Val...)
		}
	}
	return sys, nil
}

// psiPlainRows lets AssemblePsi end the rows of nodes with four whole arms to unknowns as plain
// rows directly (tests turn it off to compare with the general path).
var psiPlainRows = true

// addKnown moves the term c·ψ of a boundary point p to the right-hand side: into the body's
// own right-hand side (its part bk of the row's range) when its ψ is an unknown constant, else
// with its known value.
func (sys *PsiSystem) addKnown(bk []SparseVector, row int, c float64, boundary int, p mesh.Point) {
	if boundary >= 2 && sys.BC.Prescribed == nil {
		bk[boundary-2].add(row, c) // a range's rows come in increasing order
		return
	}
	sys.B0[row] += c * sys.knownValue(boundary, p, 0)
}

// knownValue returns ψ at point p of a boundary, with bodyPsi the body's constant when it has one.
func (sys *PsiSystem) knownValue(boundary int, p mesh.Point, bodyPsi float64) float64 {
	s := sys.BC
	switch {
	case boundary >= 2 && s.Prescribed != nil:
		return s.Prescribed(p)
	case boundary >= 2:
		return bodyPsi
	case s.Outer != nil:
		return s.Outer(p)
	}
	return s.WallPsi(boundary)
}

// knownNode returns ψ at a fluid node that is not an unknown: the inflow profile at the inlet,
// or the outer data at the inlet and outlet under Outer.
func (sys *PsiSystem) knownNode(i, j int) float64 {
	g := sys.Mesh.Grid
	if sys.BC.Outer != nil {
		return sys.BC.Outer(g.At(i, j))
	}
	return sys.BC.InletPsi(g.Y(j))
}

// BoundaryValue returns the solved ψ at point p of boundary id (a wall's or body's constant, or
// the prescribed data of a verification case).
func (sol *PsiSolution) BoundaryValue(id int, p mesh.Point) float64 {
	c := 0.0
	if id >= 2 && id-2 < len(sol.BodyPsi) {
		c = sol.BodyPsi[id-2]
	}
	return sol.Sys.knownValue(id, p, c)
}

// PsiSolution is the solved stream function.
type PsiSolution struct {
	Sys *PsiSystem
	// Psi holds ψ at every node: the solution at unknowns, the inflow profile at the inlet, the
	// boundary's value at pinned, solid and outside nodes.
	Psi []float64
	// BodyPsi is each body's constant ψ and Circulation its circulation Γ (counter-clockwise
	// positive, m²/s) measured on a closed staircase of regular links around it.
	BodyPsi, Circulation []float64
	// Solves records the linear solves: one of the bordered system (multigrid), or the 1 + K
	// superposition solves (all bodies at 0, then body k at 1).
	Solves []Stats
	// Setup is the time spent building preconditioners and contours, Solve that of the solves.
	Setup, Solve time.Duration
}

// Method names accepted by SolvePsi.
const (
	MethodAuto   = "auto" // the best available: multigrid-preconditioned Krylov
	MethodKrylov = "cg"   // Jacobi-preconditioned Krylov: BiCGStab for ψ, CG for φ
	MethodSOR    = "sor"  // red–black SOR with the optimal ω of the grid
	MethodMG     = "mgcg" // multigrid-preconditioned Krylov
)

// nodeLoopMin is the number of nodes (or unknowns) from which the loops that treat each on its
// own (initial guesses, expansions to the grid) share them out over the cores.
const nodeLoopMin = 1 << 16

// rowTracker gives the grid column and row of the nodes of a run of unknowns in increasing node
// order without dividing: the row only ever moves forward.
type rowTracker struct {
	nx, j, next int // next = (j+1)·nx, the first node of the row after j
}

// newRowTracker starts a tracker at the node of unknown q0 of nodes (none if q0 = q1).
func newRowTracker(nx int, nodes []int32, q0, q1 int) rowTracker {
	t := rowTracker{nx: nx}
	if q0 < q1 {
		t.j = int(nodes[q0]) / nx
	}
	t.next = (t.j + 1) * nx
	return t
}

// at returns the column and row of node k, which must not be below the last node asked for.
func (t *rowTracker) at(k int) (i, j int) {
	for k >= t.next {
		t.j++
		t.next += t.nx
	}
	return k - (t.next - t.nx), t.j
}

// collectFrom is the number of unknowns from which the solves collect garbage between their
// stages (collectLarge): below it the memory does not matter.
const collectFrom = 1 << 18

// collectLarge runs the garbage collector when a system has at least collectFrom unknowns. The
// solves call it where a stage has just dropped large arrays (a multigrid hierarchy's float64
// set-up stencils, the Krylov vectors) and the next is about to allocate as much, so that the next
// reuses the pages instead of raising the peak: on these machines fresh pages cost more than the
// arithmetic, and a collection of the solver's pointer-free arrays takes about a millisecond.
func collectLarge(n int) {
	if n >= collectFrom {
		pages.Collect()
	}
}

// errReleased is returned for a solve of a system whose matrix has been released.
var errReleased = errors.New("solver: the system has been released and cannot be solved again")

// ErrUnknownMethod is returned for a method name the solver does not know or does not have.
var ErrUnknownMethod = errors.New("solver: unknown method")

// Closure is one row of the small dense system that fixes the body constants: Σ_j Coef[j]·C_j = RHS.
// CirculationRow and the Kutta rows produce them.
type closure struct {
	coef []float64
	rhs  float64
}

// SolvePsi solves the ψ system for the unknowns and the body constants. With the multigrid
// method (auto, mgcg) and bodies whose constants are unknown, it solves the bordered system of
// the unknowns and the constants with one condition per body (given circulation, or the Kutta
// condition) in one Krylov solve (see psi_bordered.go); otherwise it superposes: one solve with
// every body at ψ = 0, one per body at ψ = 1 (same matrix, same preconditioner), then the body
// constants from the conditions as a small dense system. Either way it then forms the combined
// field and measures each body's circulation.
func SolvePsi(ctx context.Context, sys *PsiSystem, method string, set *Settings) (*PsiSolution, error) {
	if sys.A == nil {
		return nil, errReleased
	}
	m := sys.Mesh
	nb := len(sys.BK)
	start := time.Now()
	contours := make([]contour, len(m.Geom.Bodies))
	for b := range contours {
		var err error
		if contours[b], err = bodyContour(sys, b); err != nil {
			return nil, err
		}
	}
	n := len(sys.Nodes)
	var x []float64
	var sol *PsiSolution
	var err error
	if bordered := psiBordered && nb > 0 && (method == MethodAuto || method == MethodMG || method == ""); bordered {
		x, sol, err = sys.solveWithConstants(ctx, method, contours, set, start)
		if err != nil && ctx.Err() == nil {
			// The superposition needs no condition to be well posed in the solve itself: where
			// the bordered system breaks down (a body's condition nearly dependent on the
			// others'), it still reports what fails.
			x, sol, err = sys.superpose(ctx, method, contours, set, start)
		}
	} else {
		x, sol, err = sys.superpose(ctx, method, contours, set, start)
	}
	if err != nil {
		return sol, err
	}
	// The solves' work memory (Krylov vectors, multigrid levels, the body solutions) is garbage
	// now (nothing below uses it); collecting it before the field is allocated lets the field
	// reuse its pages, so that the peak is the solves' memory rather than the solves' plus the
	// field's (4M cells: 27 MB lower).
	collectLarge(n)
	sol.Psi = sys.expand(x, sol.BodyPsi)
	sol.Circulation = make([]float64, len(m.Geom.Bodies))
	for b := range sol.Circulation {
		c := 0.0 // a body with prescribed boundary data has no constant (and always a staircase in tests)
		if b < len(sol.BodyPsi) {
			c = sol.BodyPsi[b]
		}
		sol.Circulation[b] = contours[b].circulation(sol.Psi, c)
	}
	return sol, nil
}

// psiBordered lets SolvePsi solve the bordered system with the multigrid method (tests turn it off
// to compare with the superposition).
var psiBordered = true

// solveWithConstants solves the bordered system of the unknowns and the body constants by
// BiCGStab with the multigrid block preconditioner, from the initial guess and each body's
// constant taken from it at the body's centre.
func (sys *PsiSystem) solveWithConstants(ctx context.Context, method string, contours []contour, set *Settings, start time.Time) ([]float64, *PsiSolution, error) {
	n := len(sys.Nodes)
	// The work vectors come first: the hierarchy forms its coarse operators in them.
	ws := &Workspace{lastIterate: true}
	ws.ReserveBiCGStab(n + len(sys.BK))
	mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Scratch: ws.buf, OperatorWeights: true})
	if err != nil {
		return nil, nil, fmt.Errorf("stream function: %w", err)
	}
	collectLarge(n) // the hierarchy's set-up garbage, before the solve allocates
	sol := &PsiSolution{Sys: sys, Setup: time.Since(start)}
	t0 := time.Now()
	// y = (x, C): the initial guess, and each body's constant from it at the body's centre.
	y := pages.Make[float64](n + len(sys.BK))
	sys.initialGuess(y[:n])
	for b := range sys.BK {
		box := sys.Mesh.Geom.Bodies[b].Shape.Bounds()
		y[n+b] = sys.guessAt(0.5*(box.Min.X+box.Max.X), 0.5*(box.Min.Y+box.Max.Y))
	}
	st, err := sys.solveBordered(ctx, mg, ws, contours, y, set)
	x, c := y[:n], y[n:]
	st.Method = method
	sol.Solves = append(sol.Solves, st)
	sol.Solve = time.Since(t0)
	if err != nil {
		return nil, sol, fmt.Errorf("stream function: %w", err)
	}
	sol.BodyPsi = slices.Clone(c)
	for b, v := range sol.BodyPsi {
		if !isFinite(v) {
			return nil, sol, fmt.Errorf("solver: body %q: constant ψ is not finite", sys.Mesh.Geom.Bodies[b].Name)
		}
	}
	return x, sol, nil
}

// superpose solves with every body at ψ = 0, then each body at ψ = 1, and combines the fields
// with the body constants that meet the bodies' conditions.
func (sys *PsiSystem) superpose(ctx context.Context, method string, contours []contour, set *Settings, start time.Time) ([]float64, *PsiSolution, error) {
	m := sys.Mesh
	nb := len(sys.BK)
	solve, err := sys.solverFor(method)
	if err != nil {
		return nil, nil, err
	}
	sol := &PsiSolution{Sys: sys, Setup: time.Since(start)}
	start = time.Now()
	n := len(sys.Nodes)
	x0 := pages.Make[float64](n)
	sys.initialGuess(x0)
	st, err := solve(ctx, sys.B0, x0, set)
	st.Method = method
	sol.Solves = append(sol.Solves, st)
	if err != nil {
		return nil, sol, fmt.Errorf("stream function (bodies at ψ = 0): %w", err)
	}
	xk := make([][]float64, nb)
	var bk []float64 // body b's right-hand side, expanded for the solve; one serves every body
	if nb > 0 {
		bk = pages.Make[float64](n)
	}
	for b := range nb {
		xk[b] = pages.Make[float64](n)
		sys.BK[b].DenseTo(bk)
		st, err := solve(ctx, bk, xk[b], set)
		sol.Solves = append(sol.Solves, st)
		if err != nil {
			return nil, sol, fmt.Errorf("stream function (body %q at ψ = 1): %w", m.Geom.Bodies[b].Name, err)
		}
	}
	sol.Solve = time.Since(start)

	// Body constants: Γ_b(C) = Γ_b(ψ₀) + Σ_j C_j Γ_b(ψ_j), each linear in C.
	sol.BodyPsi = make([]float64, nb)
	if nb > 0 {
		a := mat.NewDense(nb, nb, nil)
		r := mat.NewVecDense(nb, nil)
		for b := range nb {
			row, rhs, err := sys.closureRow(b, contours[b], x0, xk)
			if err != nil {
				return nil, sol, err
			}
			a.SetRow(b, row)
			r.SetVec(b, rhs)
		}
		var c mat.VecDense
		if err := c.SolveVec(a, r); err != nil {
			return nil, sol, fmt.Errorf("solver: body constants: %w", err)
		}
		for b := range nb {
			sol.BodyPsi[b] = c.AtVec(b)
			if !isFinite(sol.BodyPsi[b]) {
				return nil, sol, fmt.Errorf("solver: body %q: constant ψ is not finite", m.Geom.Bodies[b].Name)
			}
		}
	}
	x := x0
	for b := range nb {
		cb := sol.BodyPsi[b]
		for q, v := range xk[b] {
			x[q] += cb * v
		}
	}
	return x, sol, nil
}

// closureRow returns body b's condition as a row of the constants' system.
func (sys *PsiSystem) closureRow(b int, c contour, x0 []float64, xk [][]float64) ([]float64, float64, error) {
	cond := sys.BC.Bodies[b]
	if cond.Kutta {
		return sys.kuttaRow(b, x0, xk)
	}
	row := make([]float64, len(xk))
	for j := range xk {
		row[j] = c.circulationOf(sys, xk[j], j, b)
	}
	return row, cond.Circulation - c.circulationOf(sys, x0, -1, b), nil
}

// solverFor returns the linear solve of the chosen method. Its preconditioner and its Krylov
// work vectors are made here, once, and shared by all the superposition solves.
func (sys *PsiSystem) solverFor(method string) (func(ctx context.Context, b, x []float64, s *Settings) (Stats, error), error) {
	switch method {
	case MethodAuto, MethodMG, "":
		// BiCGStab with a multigrid V-cycle.
		// The work vectors come first: the hierarchy forms its coarse operators in them.
		ws := new(Workspace)
		ws.ReserveBiCGStab(sys.A.Len())
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Scratch: ws.buf, OperatorWeights: true})
		if err != nil {
			return nil, fmt.Errorf("stream function: %w", err)
		}
		collectLarge(sys.A.Len()) // the hierarchy's set-up garbage, before the solves allocate
		return func(ctx context.Context, b, x []float64, s *Settings) (Stats, error) {
			return ws.BiCGStab(ctx, sys.A, b, x, mg, s)
		}, nil
	case MethodKrylov:
		jac := NewJacobi(sys.A)
		ws := new(Workspace)
		ws.ReserveBiCGStab(sys.A.Len())
		return func(ctx context.Context, b, x []float64, s *Settings) (Stats, error) {
			return ws.BiCGStab(ctx, sys.A, b, x, jac, s)
		}, nil
	case MethodSOR:
		g := sys.Mesh.Grid
		red, black := sys.redBlack()
		sor := &SOR{Omega: OptimalOmega(g.NX-1, g.NY-1), Red: red, Black: black}
		a := sys.A.CSR() // SOR walks CSR rows
		return func(ctx context.Context, b, x []float64, s *Settings) (Stats, error) {
			return sor.Solve(ctx, a, b, x, s)
		}, nil
	}
	return nil, fmt.Errorf("%w %q (allowed: auto, mgcg, cg, sor)", ErrUnknownMethod, method)
}

// redBlack returns the unknowns of nodes with i + j even and odd, the colours of SOR (the
// Shortley–Weller rows are five-point stencils, so no two rows of one colour couple).
func (sys *PsiSystem) redBlack() (red, black []int32) {
	return redBlack(sys.Nodes, sys.Mesh.Grid.NX)
}

// redBlack splits the unknowns at nodes (on rows of nx nodes) into those of nodes with i + j
// even and odd.
func redBlack(nodes []int32, nx int) (red, black []int32) {
	for u, node := range nodes {
		if i, j := int(node)%nx, int(node)/nx; (i+j)%2 == 0 {
			red = append(red, int32(u))
		} else {
			black = append(black, int32(u))
		}
	}
	return red, black
}

// initialGuess fills x with ψ rising linearly between the walls at every x: exact for an empty
// straight channel and close elsewhere.
func (sys *PsiSystem) initialGuess(x []float64) {
	g := sys.Mesh.Grid
	geo := sys.Mesh.Geom
	// The walls' heights at each column, found once.
	lo, hi := make([]float64, g.NX), make([]float64, g.NX)
	for i := range g.NX {
		lo[i], hi[i] = geo.Lower.Y(g.X(i)), geo.Upper.Y(g.X(i))
	}
	par.Rows(len(sys.Nodes), nodeLoopMin, func(_, q0, q1 int) {
		rows := newRowTracker(g.NX, sys.Nodes, q0, q1)
		for q := q0; q < q1; q++ {
			i, j := rows.at(int(sys.Nodes[q]))
			x[q] = sys.linearPsi(g.Y(j), lo[i], hi[i])
		}
	})
}

// guessAt returns the initial guess's ψ at (x, y) (initialGuess's value at a node).
func (sys *PsiSystem) guessAt(x, y float64) float64 {
	geo := sys.Mesh.Geom
	return sys.linearPsi(y, geo.Lower.Y(x), geo.Upper.Y(x))
}

// linearPsi returns ψ rising linearly from 0 at the lower wall's height lo to Q at the upper's hi,
// held at 0 and Q beyond them.
func (sys *PsiSystem) linearPsi(y, lo, hi float64) float64 {
	return sys.BC.Q * math.Max(0, math.Min(1, (y-lo)/(hi-lo)))
}

// expand returns ψ at every node from the unknowns x and the body constants.
func (sys *PsiSystem) expand(x, bodyPsi []float64) []float64 {
	m := sys.Mesh
	g := m.Grid
	psi := pages.Make[float64](g.Len())
	par.Rows(g.NY, max(1, nodeLoopMin/g.NX), func(_, j0, j1 int) {
		for j := j0; j < j1; j++ {
			for i := range g.NX {
				k := j*g.NX + i
				switch {
				case sys.Unknown[k] >= 0:
					psi[k] = x[sys.Unknown[k]]
				case m.Kind[k] == mesh.Fluid: // inlet column, or outlet under Outer
					psi[k] = sys.knownNode(i, j)
				default:
					owner := int(m.Owner[k])
					c := 0.0
					if owner >= 2 && owner-2 < len(bodyPsi) {
						c = bodyPsi[owner-2]
					}
					psi[k] = sys.knownValue(owner, g.At(i, j), c)
				}
			}
		}
	})
	return psi
}

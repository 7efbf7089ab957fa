package solver

import (
	"fmt"
	"runtime"
	"unsafe"

	"phipsi/internal/pages"
	"phipsi/mesh"
)

// Default settings of the multigrid preconditioner, used where an MGOptions field is zero.
const (
	// DefaultMGSmooth is the number of Gauss–Seidel sweeps before and after each coarse-grid
	// correction.
	DefaultMGSmooth = 1
	// DefaultMGCoarsest is the largest number of unknowns the coarsest level may have; it is
	// solved exactly with a dense inverse.
	DefaultMGCoarsest = 400
)

// MGOptions controls a multigrid preconditioner. The zero value means the defaults.
type MGOptions struct {
	// Symmetric makes the V-cycle a symmetric operator when A is symmetric, as CG needs: the
	// sweeps after the coarse-grid correction visit the colours in the reverse order of those
	// before it (the adjoint smoother). Otherwise both sweep in the same order.
	Symmetric bool
	// Smooth is the number of Gauss–Seidel sweeps on each level before and after the coarse-grid
	// correction; 0 means DefaultMGSmooth. It must not be negative.
	Smooth int
	// Coarsest is the number of unknowns at or below which a level is not coarsened further but
	// solved exactly; 0 means DefaultMGCoarsest. It must not be negative.
	Coarsest int
	// Scratch, if not nil, is memory the set-up may use for the float64 operators of the coarse
	// levels while it forms them: on a grid whose nodes are nearly all unknowns, about 2.9
	// values per unknown hold every level (a level's operator and the next one's are needed at
	// once; the levels take turns in two regions). The Multigrid keeps no reference to it, so the
	// caller may use it for anything once NewMultigrid has returned: the work vectors of the
	// Krylov solve that the V-cycle will precondition, say, which so cost no fresh memory twice.
	// A level that does not fit allocates its own.
	Scratch []float64
	// OperatorWeights takes the interpolation weights of the nodes near walls and bodies from
	// the operator instead of bilinear ones (mg_transfer.go). On the stream function's
	// Shortley–Weller systems this halves the BiCGStab iterations (62k to 4M cells: 7–9 → 4–5
	// around a cylinder and a NACA section); on the velocity potential it helped thin bodies
	// (CG around a thin cambered vane 20 → 13 iterations) but cost a cylinder two (8 → 10):
	// SolvePhi uses it only around slender bodies (slenderBody).
	OperatorWeights bool
}

// Multigrid is a geometric multigrid V-cycle used as a preconditioner (Tatebe 1993: R = Pᵀ,
// equal smoothing before and after the correction, an exact coarsest solve and a zero initial
// guess in every call, so that the V-cycle is a fixed linear operator M⁻¹). It is made by
// NewMultigrid for a matrix whose unknowns are nodes of a structured grid, and is safe for use by
// one goroutine at a time. One Multigrid serves any number of solves with its matrix.
//
// Levels. Coarse node (I, J) of a level sits at node (2I, 2J) of the level above; a level of
// nx × ny nodes has nx/2 + 1 by ny/2 + 1 coarse nodes, so odd and even node counts are both
// covered (with an even count the last coarse column lies one node beyond the grid and carries
// only the interpolation to the last fine column). Prolongation P is bilinear interpolation:
// a fine node takes its coincident coarse value, the mean of the two coarse nodes beside it on
// a coarse edge, or the mean of the four around it in a coarse cell. Restriction is R = Pᵀ
// (full weighting 1, ½, ¼). A coarse node exists when some unknown of the level above
// interpolates from it, so bodies, walls and thin gaps are seen by every level through the
// operator, never through a rediscretised geometry.
//
// Coarse operators are Galerkin products A_c = Pᵀ A P (nine-point stencils on every coarse
// level), computed from the matrix alone in float64 and stored in float32; holes, steps and
// small bodies need no special treatment, and A_c is symmetric, bit for bit, whenever A is and
// Symmetric is set. The coarsest level (at most Coarsest unknowns) is solved exactly by a dense
// inverse formed once with an LU factorisation, or by the pseudo-inverse from an SVD when the
// coarsest operator is singular or nearly so (which thin features can cause).
//
// Smoothing is Gauss–Seidel in a colour order whose colours do not couple, so each colour is
// updated in parallel with a result independent of the number of threads: on the finest level
// red–black by the parity of i + j when every row is a five-point stencil (as the
// Shortley–Weller and cut-face rows are), otherwise four colours by (i mod 2, j mod 2); on the
// nine-point coarse levels always the four colours, which no nine-point stencil couples. With
// red–black and one sweep (the default), the finest level's work is two passes over the matrix
// per V-cycle: the first red step, the black step and the residual in one, the interpolated
// correction and both colour steps in the other.
//
// Limits. Unknowns that share a node (the two sides of a body thinner than a cell, in the φ
// problem) share their coarse values, so the coarse levels cannot represent the jump across such
// a body and the iteration count then grows slowly with the grid (about as N^¼), although it
// stays far below that of the Jacobi preconditioner. The ψ problem has one unknown per node
// and is not affected.
//
// Work. Every kernel walks fixed blocks of grid rows, shared among min(GOMAXPROCS, blocks)
// goroutines of the package's worker team; no kernel reduces across blocks, so results are bit-identical for any number of threads. All
// memory is allocated by NewMultigrid (about 32 bytes per fine grid node); PreconSolve allocates
// nothing.
//
// References: O. Tatebe, The multigrid preconditioned conjugate gradient method, Sixth Copper
// Mountain Conference on Multigrid Methods, 1993; W. L. Briggs, V. E. Henson, S. F. McCormick,
// A Multigrid Tutorial, 2nd ed., SIAM, 2000; U. Trottenberg, C. W. Oosterlee, A. Schüller,
// Multigrid, Academic Press, 2001 (Galerkin coarse operators, multicolour smoothers).
type Multigrid struct {
	n         int
	smooth    int
	symmetric bool
	fine      *fineLevel
	levels    []*gridLevel  // coarse levels, coarsest last; empty when direct is set
	direct    *denseInverse // the fine level solved exactly (small systems), or nil
	team      *team
	// minParallel is the number of nodes below which a level's kernels run on the calling
	// goroutine alone: for smaller levels, waking helpers costs more than it saves.
	minParallel int
	// unfused makes the finest level run its steps as separate passes (for tests: the fused
	// passes must give the same bits).
	unfused bool
	// guessX holds a level's starting values during Guess (first coarse level's size).
	guessX []float64
	// scratch is MGOptions.Scratch during set-up (see setupStencils), nil afterwards.
	scratch []float64
	// ownWeights is MGOptions.OperatorWeights.
	ownWeights bool
	regions    [2][]stencil64
}

// mgMinParallel is the default Multigrid.minParallel.
const mgMinParallel = 32768

// mgBlockNodes is about the number of grid nodes in one block of work.
const mgBlockNodes = 16384

// firstUnknowns returns the unknown of each node of g: the first of those at the node, −1 for
// none.
func firstUnknowns(nodes []int32, g mesh.Grid) []int32 {
	unknown := make([]int32, g.Len())
	for k := range unknown {
		unknown[k] = -1
	}
	for u := len(nodes) - 1; u >= 0; u-- {
		unknown[nodes[u]] = int32(u)
	}
	return unknown
}

// NewMultigrid builds a V-cycle preconditioner for the square matrix a whose unknown u sits at
// node nodes[u] (index j·NX + i) of grid g. nodes must be non-decreasing; several unknowns may
// share a node (the pieces of a cell that a thin body splits), provided they do not couple to
// each other; they interpolate from the same coarse nodes. Every off-diagonal entry of a must
// couple nodes at most one grid step apart in each direction (five- or nine-point rows), and
// every diagonal entry must be positive. The matrix is referenced, not copied, and must not
// change while the preconditioner is in use.
//
// A system of at most MGOptions.Coarsest unknowns is solved exactly by a dense inverse.
//
// NewMultigrid returns an error if a's couplings or diagonal do not meet these conditions, a
// coarse level ends with a non-positive diagonal entry, or the grid is narrower than 3 nodes
// with more than Coarsest unknowns. It panics if a is neither a *CSR nor a *GridMatrix on g,
// len(nodes) is not a.Len(), a node lies outside the grid, or an option is negative.
//
// A *CSR is stored as a GridMatrix for the finest level (the same matrix, bit for bit, in less
// memory); a *GridMatrix is used as it is and must have been made with the same nodes.
func NewMultigrid(a Operator, g mesh.Grid, nodes []int32, o MGOptions) (*Multigrid, error) {
	if len(nodes) != a.Len() {
		panic(fmt.Sprintf("solver: NewMultigrid: len(nodes) = %d, want a.Len() = %d", len(nodes), a.Len()))
	}
	if o.Smooth < 0 || o.Coarsest < 0 {
		panic(fmt.Sprintf("solver: NewMultigrid: MGOptions.Smooth and Coarsest must be >= 0, got %d and %d", o.Smooth, o.Coarsest))
	}
	if g.NX < 1 || g.NY < 1 {
		panic(fmt.Sprintf("solver: NewMultigrid: grid must have at least one node, got %d × %d", g.NX, g.NY))
	}
	for u, k := range nodes {
		if k < 0 || int(k) >= g.Len() {
			panic(fmt.Sprintf("solver: NewMultigrid: nodes[%d] = %d is outside the %d × %d grid", u, k, g.NX, g.NY))
		}
		if u > 0 && k < nodes[u-1] {
			panic(fmt.Sprintf("solver: NewMultigrid: nodes must be non-decreasing, got %d after %d at %d", k, nodes[u-1], u))
		}
	}
	var gm *GridMatrix
	switch m := a.(type) {
	case *GridMatrix:
		if m.grid != g {
			panic("solver: NewMultigrid: the GridMatrix is on another grid")
		}
		gm = m
	case *CSR:
		gm = NewGridMatrix(m, g, nodes, firstUnknowns(nodes, g))
	default:
		panic(fmt.Sprintf("solver: NewMultigrid: a must be a *CSR or a *GridMatrix, got %T", a))
	}
	mg := &Multigrid{
		ownWeights:  o.OperatorWeights,
		n:           gm.N,
		smooth:      o.Smooth,
		symmetric:   o.Symmetric,
		team:        workTeam,
		minParallel: mgMinParallel,
		scratch:     o.Scratch,
	}
	defer func() { mg.scratch, mg.regions = nil, [2][]stencil64{} }()
	if mg.smooth == 0 {
		mg.smooth = DefaultMGSmooth
	}
	coarsest := o.Coarsest
	if coarsest == 0 {
		coarsest = DefaultMGCoarsest
	}
	if gm.N == 0 {
		return mg, nil
	}
	if gm.N > coarsest && (g.NX < 3 || g.NY < 3) {
		return nil, fmt.Errorf("solver: multigrid: a grid of %d × %d nodes is too narrow to coarsen (at least 3 × 3)", g.NX, g.NY)
	}
	if gm.N <= coarsest {
		d, err := denseFromCSR(gm.CSR(), o.Symmetric)
		if err != nil {
			return nil, err
		}
		mg.direct = d
		return mg, nil
	}
	fine, err := newFineLevel(gm, g, nodes)
	if err != nil {
		return nil, err
	}
	mg.fine = fine
	lv, err := fine.coarsen(mg)
	if err != nil {
		return nil, err
	}
	mg.levels = append(mg.levels, lv)
	for lv.active > coarsest && (lv.nx > 2 || lv.ny > 2) {
		// The next level is the Galerkin product of this one in float64; then this one is
		// stored for smoothing.
		co, err := lv.coarsen(mg)
		if err != nil {
			return nil, err
		}
		if err := lv.finish(o.Symmetric); err != nil {
			return nil, err
		}
		lv = co
		mg.levels = append(mg.levels, lv)
	}
	// The coarsest level is only solved, never smoothed: it keeps its dense inverse alone.
	if lv.dense, err = lv.denseInverse(o.Symmetric); err != nil {
		return nil, err
	}
	lv.st64, lv.invD = nil, nil
	// One residual buffer serves every coarse level: a level's residual is restricted before
	// the next level computes its own.
	size := 0
	for _, lv := range mg.levels[:len(mg.levels)-1] {
		size = max(size, len(lv.x))
	}
	shared := pages.Make[float64](size)
	for l, lv := range mg.levels {
		lv.r = shared[:min(len(shared), len(lv.x))]
		if l == 0 {
			lv.src, lv.srcStride = fine.r, fine.stride
		} else {
			lv.src, lv.srcStride = shared, mg.levels[l-1].sx
		}
		if l+1 < len(mg.levels) {
			lv.coarser = mg.levels[l+1]
		}
	}
	fine.coarse = mg.levels[0]
	return mg, nil
}

// Len returns the number of unknowns of the finest level.
func (mg *Multigrid) Len() int { return mg.n }

// Levels returns the number of unknowns on each level, finest first. A coarse level counts
// the coarse nodes some unknown of the level above interpolates from.
func (mg *Multigrid) Levels() []int {
	out := []int{mg.n}
	for _, lv := range mg.levels {
		out = append(out, lv.active)
	}
	return out
}

// PreconSolve applies one V-cycle to r with a zero initial guess and writes the result into
// dst: dst = M⁻¹ r for the fixed linear operator M⁻¹ the V-cycle is. It never fails. It panics
// if dst or r does not have length Len or they are the same slice.
func (mg *Multigrid) PreconSolve(dst, r []float64) error {
	if len(dst) != mg.n || len(r) != mg.n {
		panic(fmt.Sprintf("solver: Multigrid.PreconSolve: len(dst) = %d and len(r) = %d, want %d", len(dst), len(r), mg.n))
	}
	if mg.n == 0 {
		return nil
	}
	if &dst[0] == &r[0] {
		panic("solver: Multigrid.PreconSolve: dst and r must not be the same slice")
	}
	if mg.direct != nil {
		mg.direct.solveTo(dst, r)
		return nil
	}
	f := mg.fine
	f.x, f.b = dst, r

	// Down: smooth, form the residual, restrict it.
	fused := f.ncolour == 2 && !mg.unfused
	if fused {
		mg.runFused(finePre, 0)
	} else {
		mg.smoothFine(true)
		mg.runFine(fineResidual, f.lastColour())
	}
	mg.runGrid(mg.levels[0], gridRestrict, 0)
	mg.cycleFrom(0)
	if fused {
		mg.runFused(finePost, mg.sweepColour(0, 2, false))
	} else {
		mg.runFine(fineProlong, 0)
		mg.smoothFine(false)
	}
	f.x, f.b = nil, nil // keep no reference to the caller's vectors
	return nil
}

// cycleFrom runs the coarse part of a V-cycle from coarse level l, whose b is set: from x = 0 on
// every level l' ≥ l, smooth, form the residual and restrict it down to the coarsest level,
// solve there, then interpolate the correction and smooth back up to level l.
func (mg *Multigrid) cycleFrom(l int) {
	last := len(mg.levels) - 1
	for q := l; q <= last; q++ {
		lv := mg.levels[q]
		if q > l {
			mg.runGrid(lv, gridRestrict, 0)
		}
		if q == last {
			lv.dense.solveTo(lv.x, lv.b)
			break
		}
		mg.smoothGrid(lv, true)
		mg.runGrid(lv, gridResidual, 0)
	}
	for q := last - 1; q >= l; q-- {
		lv := mg.levels[q]
		mg.runGrid(lv, gridProlong, 0)
		mg.smoothGrid(lv, false)
	}
}

// Guess improves x, an initial guess of A x = b, by one full-multigrid pass on the residual
// equation A e = b − A x (Trottenberg, Oosterlee and Schüller 2001, §2.6): the residual is
// restricted to every coarse level, solved exactly on the coarsest, and each level up starts
// from the interpolation of the level below and takes one V-cycle of its own, so that every
// level's correction is about as accurate as its grid allows; the first coarse level's
// correction, interpolated, is added to x. It costs about half a V-cycle and leaves a Krylov
// solve started from x fewer iterations to go. It panics if x or b does not have length Len.
func (mg *Multigrid) Guess(x, b []float64) {
	if len(x) != mg.n || len(b) != mg.n {
		panic(fmt.Sprintf("solver: Multigrid.Guess: len(x) = %d and len(b) = %d, want %d", len(x), len(b), mg.n))
	}
	if mg.n == 0 {
		return
	}
	if mg.direct != nil {
		mg.direct.solveTo(x, b)
		return
	}
	f := mg.fine
	f.x, f.b = x, b
	defer func() { f.x, f.b = nil, nil }()
	mg.runFine(fineResidual, -1)
	last := len(mg.levels) - 1
	// Down: the residual on every level; each level's b passes through the shared residual
	// buffer, which the next level restricts from.
	mg.runGrid(mg.levels[0], gridRestrict, 0)
	for q := 1; q <= last; q++ {
		above := mg.levels[q-1]
		copy(above.r, above.b)
		mg.runGrid(mg.levels[q], gridRestrict, 0)
	}
	lv := mg.levels[last]
	lv.dense.solveTo(lv.x, lv.b)
	if mg.guessX == nil && last > 0 {
		mg.guessX = make([]float64, len(mg.levels[0].x))
	}
	// Up: interpolate, then one V-cycle on the level's residual equation.
	for q := last - 1; q >= 0; q-- {
		lv := mg.levels[q]
		clear(lv.x)
		mg.runGrid(lv, gridProlong, 0)
		start := mg.guessX[:len(lv.x)]
		copy(start, lv.x)
		mg.runGrid(lv, gridResidual, 0)
		copy(lv.b, lv.r[:len(lv.b)])
		mg.cycleFrom(q)
		for k, v := range start {
			lv.x[k] += v
		}
	}
	mg.runFine(fineProlong, 0)
}

// sweepColour returns the colour of step s (0 ≤ s < nc) of a sweep: ascending before the
// coarse-grid correction and, in a symmetric V-cycle, descending after it.
func (mg *Multigrid) sweepColour(s, nc int, pre bool) int {
	if !pre && mg.symmetric {
		return nc - 1 - s
	}
	return s
}

// smoothFine runs the smoothing sweeps of the finest level; before the correction the first
// colour starts from x = 0.
func (mg *Multigrid) smoothFine(pre bool) {
	f := mg.fine
	for sweep := range mg.smooth {
		for s := range f.ncolour {
			c := mg.sweepColour(s, f.ncolour, pre)
			if pre && sweep == 0 && s == 0 {
				mg.runFine(fineInit, c)
				continue
			}
			mg.runFine(fineSmooth, c)
		}
	}
}

// smoothGrid runs the smoothing sweeps of coarse level lv, each as two half-sweeps over the rows
// of one parity (see gridLevel.runBlock): colours 0, 1 then 2, 3 (the even rows, then the odd
// ones), or in a symmetric V-cycle after the correction 3, 2 then 1, 0.
func (mg *Multigrid) smoothGrid(lv *gridLevel, pre bool) {
	for sweep := range mg.smooth {
		if pre && sweep == 0 {
			mg.runGrid(lv, gridInit, 0)
			mg.runGrid(lv, gridSmooth, 1) // odd rows, even i first
			continue
		}
		if pre || !mg.symmetric {
			mg.runGrid(lv, gridSmooth, 0) // even rows, even i first
			mg.runGrid(lv, gridSmooth, 1)
			continue
		}
		mg.runGrid(lv, gridSmooth, 1|2) // odd rows, odd i first
		mg.runGrid(lv, gridSmooth, 0|2)
	}
}

// runFine runs kernel op with parameter c on the blocks of the finest level.
func (mg *Multigrid) runFine(op, c int) {
	f := mg.fine
	f.op, f.c = op, c
	mg.team.run(f, f.nblocks, f.nx*f.ny < mg.minParallel)
}

// runFused runs fused kernel op of the finest level (first post-smoothing colour c) on one
// chunk of rows per goroutine, then the rows the chunks left out.
func (mg *Multigrid) runFused(op, c int) {
	f := mg.fine
	f.op, f.c = op, c
	f.nstage = 2*mg.smooth + 1
	f.nchunk = 1
	if f.nx*f.ny >= mg.minParallel {
		f.nchunk = max(1, min(runtime.GOMAXPROCS(0), maxTeamWorkers, f.ny/8))
	}
	mg.team.run(f, f.nchunk, f.nchunk == 1)
	f.finishPipeline()
}

// runGrid runs kernel op with parameter c on the blocks of coarse level lv.
func (mg *Multigrid) runGrid(lv *gridLevel, op, c int) {
	lv.op, lv.c = op, c
	mg.team.run(lv, lv.nblocks, lv.nx*lv.ny < mg.minParallel)
}

// blockRowsFor returns the number of grid rows per block for rows of nx nodes.
func blockRowsFor(nx int) int { return max(1, (mgBlockNodes+nx-1)/nx) }

// ceilDiv returns ⌈a/b⌉ for a ≥ 0, b > 0.
func ceilDiv(a, b int) int { return (a + b - 1) / b }

// setupStencils returns zeroed float64 stencils for coarse level l (0 the first) of size nodes,
// from the set-up scratch where it fits: levels 0 and 1 take the first two regions of it, and
// each later level the region of the level two above, which has been stored in float32 and has
// dropped its float64 operator by then (levels shrink, so it fits).
func (mg *Multigrid) setupStencils(l, size int) []stencil64 {
	r := &mg.regions[l&1]
	if l < 2 {
		// Region 0 starts the scratch, region 1 follows it.
		off := 0
		if l == 1 {
			off = 9 * len(mg.regions[0])
		}
		if len(mg.scratch)-off >= 9*size { // off ≤ len(mg.scratch): region 0 came from it
			*r = asStencils(mg.scratch[off : off+9*size])
		}
	}
	if len(*r) < size {
		return pages.Make[stencil64](size)
	}
	st := (*r)[:size]
	clear(st)
	return st
}

// asStencils views v, whose length is a multiple of 9, as stencils.
func asStencils(v []float64) []stencil64 {
	if len(v) == 0 {
		return nil
	}
	return unsafe.Slice((*stencil64)(unsafe.Pointer(unsafe.SliceData(v))), len(v)/9)
}

package solver

import (
	"context"
	"fmt"
	"math"
	"slices"
	"time"

	"phipsi/bc"
	"phipsi/internal/pages"
	"phipsi/internal/par"
	"phipsi/mesh"
)

// PhiSystem is the discrete velocity-potential problem of one mesh and one set of boundary
// conditions: A x = B, with A symmetric positive definite.
//
// The φ problem is ∇²φ = 0 with ∂φ/∂n = 0 on walls and bodies, ∂φ/∂x = U on the inlet and φ = 0
// on the outlet. It is discretised by the symmetric cut-face finite-volume form of Ng, Min &
// Gibou (J. Comput. Phys. 228, 2009): the unknowns sit at the nodes, each owning the dual cell of
// mesh.Faces, and the flux through an open stretch of a face of length ℓ is (ℓ/H)(φ_nb − φ₀). For
// every fluid piece of every dual cell the fluxes balance,
//
//	Σ_parts (ℓ/H)(φ₀ − φ_nb) = −U·ℓ_inlet,
//
// where ℓ_inlet is the open length of the cell's inlet side (first column only); a face closed by
// a wall or body carries no flux, which is the zero-flux condition. A node outside the fluid whose
// cell is partly open carries an unknown too (its value extends φ across the boundary), and a
// cell that a thin body splits carries one unknown per piece (mesh.Faces). Each open part adds
// the same −ℓ/H to the two rows it joins, so A is symmetric; it is diagonally dominant with a
// positive diagonal.
//
// Well-posedness: zero flux everywhere except the inlet would leave φ defined up to a constant
// and the inflow with nowhere to go. The outlet column is Dirichlet (φ = 0), and assembly checks
// that every connected group of unknowns couples to a Dirichlet node through open faces. A group
// that does not (fluid cut off from the outlet) gets identity rows and φ = 0 when no inflow
// reaches it, and is an error when some does. Every remaining group is then a weighted graph
// Laplacian plus a non-zero, non-negative diagonal of Dirichlet couplings, which is positive
// definite, so the solution is unique and CG applies.
//
// Circulation: with Γ_k ≠ 0 around body k, φ is many-valued. Cuts places a branch cut from the
// body to the outlet along dual-cell faces (see Cut); φ is single-valued off the cuts and rises by
// Γ_k across cut k from its left to its right (from above its horizontal part to below it). A
// face part that crosses a cut keeps its −ℓ/H in both rows and moves the jump to the right-hand
// side: the neighbour's value enters as φ_nb − Δ with Δ = ±Γ_k the rise from the row's side to
// the neighbour's, which adds −ℓΔ/H to one row and +ℓΔ/H to the other, so A is unchanged and
// stays symmetric. The outlet nodes below a cut take φ = Γ_k.
type PhiSystem struct {
	Mesh  *mesh.Mesh
	BC    *bc.Set
	Faces *mesh.Faces
	Cuts  []Cut
	A     *GridMatrix
	B     []float64
	// Unknown maps a node to the unknown of piece 0 of its dual cell (piece p is Unknown[k] + p),
	// −1 for a node whose value is prescribed or whose cell holds no fluid.
	Unknown []int32
	// Nodes maps an unknown to its node.
	Nodes []int32
	// Dirichlet marks the nodes whose value is prescribed (Known gives the values).
	Dirichlet []bool
	known     map[int32]float64 // the non-zero prescribed values
	// Isolated counts the unknowns cut off from every prescribed value (set to 0).
	Isolated int
	// Inflow is the flux through the inlet, U × the inlet's open length, m²/s (0 with Outer).
	Inflow float64
	outer  bool // assembled under PhiOptions.Outer: the initial guess is zero
}

// PhiOptions changes how AssemblePhi builds the φ problem. The zero value (and nil) means the
// problem of the scenario: inlet flux, outlet φ = 0.
type PhiOptions struct {
	// Outer, if not nil, prescribes φ = Outer(p) at every node of the grid's outer ring (first and
	// last rows and columns), replacing the inlet flux and the outlet's φ = 0. It exists to impose
	// an exact far field in tests; walls then matter only where they cut faces inside the ring.
	// Where a cut meets the ring, Outer must return the value of the branch on the node's own side
	// (Cut.Below; the cuts can be had beforehand from Cuts).
	Outer func(p mesh.Point) float64
}

// Cut is the branch cut of φ behind one body with circulation. It runs along dual-cell faces
// only, so it never passes through a cell and no node lies on it: a vertical part on the line
// x = X0 half-way between columns Col and Col + 1, from the body's outline at y = YB to Y (absent
// when Col is −1), then the horizontal part on the line y = Y half-way between rows Row and
// Row + 1, from X0 downstream to X1: the outlet (ToOutlet) or the first wall that line meets.
//
// Crossing the cut from its left to its right (seen travelling from the body towards the outlet;
// right of the horizontal part is below it) raises φ by Circulation, Γ counter-clockwise
// positive: going once around the body counter-clockwise from just above the cut to just below
// it raises φ by Γ.
type Cut struct {
	Body        int
	Row         int
	Y           float64
	X0, X1      float64
	ToOutlet    bool
	Col         int
	YB          float64
	Circulation float64
}

// Below reports whether p lies below the cut's horizontal part, within its x range
// (X0 < x ≤ X1).
func (c Cut) Below(p mesh.Point) bool { return p.Y < c.Y && p.X > c.X0 && p.X <= c.X1 }

// jump returns how much φ rises from the low side (west or south) of face number face to its
// high side where the cut crosses the face at along-face coordinate at (y on an east face, x on
// a north face), and 0 where it does not cross.
func (c Cut) jump(f *mesh.Faces, face int, at float64) float64 {
	n := f.Len()
	if face >= 2*n {
		return 0
	}
	k := face / 2
	i, j := k%f.NX, k/f.NX
	if face%2 == 1 {
		if j == c.Row && at > c.X0 && at < c.X1 {
			return -c.Circulation // low side below the horizontal part: on its right
		}
		return 0
	}
	if i != c.Col || at <= math.Min(c.YB, c.Y) || at >= math.Max(c.YB, c.Y) {
		return 0
	}
	if c.YB < c.Y {
		return c.Circulation // travelling up: east, the high side, is on the right
	}
	return -c.Circulation
}

// Cuts places a branch cut for every body whose circulation is not negligible (|Γ| ≤ 1e-12·U·size
// is round-off and gets none), in body order. Among the places where a face line meets the
// outline within two spacings of the body's trailing edge — the Kutta corner when the conditions
// name one, else the body's most downstream point — the cut starts at the one nearest to it: where
// a half-row line meets the outline furthest downstream (no vertical part), or where a half-column
// line meets it highest or lowest (a vertical part up or down to the next half-row). It panics if
// len(circulation) differs from the number of bodies.
func Cuts(m *mesh.Mesh, s *bc.Set, circulation []float64) ([]Cut, error) {
	nb := len(m.Geom.Bodies)
	if len(circulation) != nb {
		panic(fmt.Sprintf("solver: Cuts: %d circulations for %d bodies", len(circulation), nb))
	}
	var cuts []Cut
	for k, gam := range circulation {
		body := m.Geom.Bodies[k]
		if !isFinite(gam) {
			return nil, fmt.Errorf("solver: body %q: circulation must be finite, got %g", body.Name, gam)
		}
		box := body.Shape.Bounds()
		if math.Abs(gam) <= 1e-12*s.Speed*box.Max.Sub(box.Min).Norm() {
			continue
		}
		var te mesh.Point
		if k < len(s.TrailingEdges) && s.TrailingEdges[k].Set {
			te = s.TrailingEdges[k].P
		} else {
			te = downstreamMost(body.Shape, m.Grid.H)
		}
		c, ok := placeCut(m, k, te)
		if !ok {
			return nil, fmt.Errorf("solver: body %q: no face line near its trailing edge (%g, %g) meets it, so φ's branch cut cannot start on it; refine the grid", body.Name, te.X, te.Y)
		}
		c.Circulation = gam
		cuts = append(cuts, c)
	}
	return cuts, nil
}

// downstreamMost returns the point of the outline with the largest x (to within h/16).
func downstreamMost(sh mesh.Shape, h float64) mesh.Point {
	var best mesh.Point
	first := true
	consider := func(p mesh.Point) {
		if first || p.X > best.X {
			best, first = p, false
		}
	}
	for _, sp := range sh.Sample(h / 8) {
		consider(sp.P)
	}
	for _, c := range sh.Corners() {
		consider(c.P)
	}
	return best
}

// placeCut finds the cut of body k that starts nearest to the point te.
func placeCut(m *mesh.Mesh, k int, te mesh.Point) (Cut, bool) {
	g := m.Grid
	h := g.H
	sh := m.Geom.Bodies[k].Shape
	box := sh.Bounds()
	best := Cut{Body: k, Col: -1}
	bestDist := math.Inf(1)
	consider := func(c Cut, start mesh.Point) {
		if d := start.Sub(te).Norm(); d < bestDist {
			best, bestDist = c, d
		}
	}
	var buf []float64
	// Half-rows: start where the line meets the outline furthest downstream.
	jc := int(math.Floor((te.Y - g.Y0) / h))
	for j := jc - 2; j <= jc+2; j++ {
		if j < 0 || j > g.NY-2 {
			continue
		}
		y := g.Y(j) + h/2
		a, b := mesh.Point{X: box.Min.X - h, Y: y}, mesh.Point{X: box.Max.X + h, Y: y}
		buf = sh.Intersect(buf[:0], a, b)
		if len(buf) == 0 {
			continue
		}
		x0 := math.Inf(-1)
		for _, t := range buf {
			x0 = math.Max(x0, a.X+t*(b.X-a.X))
		}
		consider(Cut{Body: k, Row: j, Y: y, X0: x0, Col: -1}, mesh.Point{X: x0, Y: y})
	}
	// Half-columns: start at the highest crossing going up, or the lowest going down, to the
	// nearest half-row beyond it.
	ic := int(math.Floor((te.X - g.X0) / h))
	for i := ic - 2; i <= ic+1; i++ {
		if i < 0 || i > g.NX-2 {
			continue
		}
		x := g.X(i) + h/2
		a, b := mesh.Point{X: x, Y: box.Min.Y - h}, mesh.Point{X: x, Y: box.Max.Y + h}
		buf = sh.Intersect(buf[:0], a, b)
		if len(buf) == 0 {
			continue
		}
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, t := range buf {
			y := a.Y + t*(b.Y-a.Y)
			lo, hi = math.Min(lo, y), math.Max(hi, y)
		}
		// Up: the first half-row strictly above hi; down: the last strictly below lo.
		if j := int(math.Floor((hi-g.Y0)/h - 0.5)); j+1 <= g.NY-2 {
			j++
			if y := g.Y(j) + h/2; y > hi {
				consider(Cut{Body: k, Row: j, Y: y, X0: x, Col: i, YB: hi}, mesh.Point{X: x, Y: hi})
			}
		}
		if j := int(math.Ceil((lo-g.Y0)/h-0.5)) - 1; j >= 0 {
			if y := g.Y(j) + h/2; y < lo {
				consider(Cut{Body: k, Row: j, Y: y, X0: x, Col: i, YB: lo}, mesh.Point{X: x, Y: lo})
			}
		}
	}
	if math.IsInf(bestDist, 1) {
		return Cut{}, false
	}
	// The cut ends at the outlet, or where its row's line first meets a wall.
	xEnd := g.X(g.NX - 1)
	best.X1, best.ToOutlet = xEnd, true
	for _, w := range [2]*mesh.Wall{m.Geom.Lower, m.Geom.Upper} {
		for _, x := range w.CrossHorizontal(buf[:0], best.Y, best.X0, xEnd) {
			if x > best.X0 && x < best.X1 {
				best.X1, best.ToOutlet = x, false
			}
		}
	}
	return best, true
}

// FaceJump returns how much φ rises, over all cuts, from the low side (west or south) of face
// number face to its high side at along-face coordinate at (y on an east face, x on a north
// face): a value φ_high on the high side continues the low side's branch as φ_high − FaceJump.
func (sys *PhiSystem) FaceJump(face int, at float64) float64 {
	s := 0.0
	for _, c := range sys.Cuts {
		s += c.jump(sys.Faces, face, at)
	}
	return s
}

// AssemblePhi builds the φ system of mesh m under conditions s, with the circulation of every
// body (from the ψ solution; nil means none). opt may be nil. It panics if circulation is not nil
// and its length differs from the number of bodies.
func AssemblePhi(m *mesh.Mesh, s *bc.Set, circulation []float64, opt *PhiOptions) (*PhiSystem, error) {
	if circulation == nil {
		circulation = make([]float64, len(m.Geom.Bodies))
	}
	var o PhiOptions
	if opt != nil {
		o = *opt
	}
	faces, err := mesh.NewFaces(m)
	if err != nil {
		return nil, err
	}
	cuts, err := Cuts(m, s, circulation)
	if err != nil {
		return nil, err
	}
	g := m.Grid
	n := g.Len()
	sys := &PhiSystem{Mesh: m, BC: s, Faces: faces, Cuts: cuts, Unknown: pages.Make[int32](n),
		Dirichlet: pages.Make[bool](n), known: map[int32]float64{}}

	// Prescribed values: the outlet column, or the whole outer ring with Outer.
	if o.Outer == nil {
		for j := range g.NY {
			k := g.Index(g.NX-1, j)
			sys.Dirichlet[k] = true
			for _, c := range cuts {
				if c.ToOutlet && j <= c.Row && c.Circulation != 0 {
					sys.known[int32(k)] += c.Circulation
				}
			}
		}
	} else {
		for j := range g.NY {
			for i := range g.NX {
				if i != 0 && i != g.NX-1 && j != 0 && j != g.NY-1 {
					continue
				}
				k := g.Index(i, j)
				v := o.Outer(g.At(i, j))
				if !isFinite(v) {
					return nil, fmt.Errorf("solver: PhiOptions.Outer at (%g, %g) is not finite", g.X(i), g.Y(j))
				}
				sys.Dirichlet[k] = true
				if v != 0 {
					sys.known[int32(k)] = v
				}
			}
		}
	}
	// Unknowns: every piece of every cell whose value is not prescribed.
	sys.Nodes = numberUnknowns(g, sys.Unknown, func(k int) int {
		if sys.Dirichlet[k] {
			return 0
		}
		return faces.Pieces(k)
	})
	nu := len(sys.Nodes)
	if nu == 0 {
		return nil, fmt.Errorf("solver: the φ problem has no unknowns")
	}
	sys.B = pages.Make[float64](nu)
	// The inflow of each row with an inlet face, kept per range of rows (only the first column
	// has any: a vector of them all would be 8 bytes an unknown of zeros).
	nr := rowRanges(nu)
	inflowParts := make([][]rowInflow, nr)
	anchored := make([]bool, nu) // couples to a prescribed value
	type side struct {
		face, nb int
		high     bool
	}
	cutRow, cutCol := CutLines(cuts, g)
	// Each row writes its own entries of B and anchored and its range's inflow only, so the rows
	// can be built on several goroutines (buildRows).
	a, err := buildRows(g, sys.Nodes, sys.Unknown, nr, func(bld *GridBuilder, r, row int) error {
		var partBuf [8]mesh.FacePart
		var sideBuf [4]side
		sides := sideBuf[:0]
		k := int(sys.Nodes[row])
		piece := row - int(sys.Unknown[k])
		i, j := k%g.NX, k/g.NX
		if phiDirectRows && piece == 0 && !cutRow[j] && !cutCol[i] && sys.wholeInterior(i, j) {
			// Four whole faces (α = 1) to unknowns, no cut: the general loop below would add
			// −1 to each neighbour and 4 on the diagonal, with nothing added to B, which is
			// the plain stencil when each neighbour has one unknown.
			if bld.EndPlainRow() {
				return nil
			}
			for _, nb := range [4]int{k - 1, k + 1, k - g.NX, k + g.NX} {
				bld.Add(int(sys.Unknown[nb]), -1)
			}
			bld.Add(row, 4)
			return nil
		}
		if i == 0 {
			sides = append(sides, side{faces.InletFace(j), -1, true})
		} else {
			sides = append(sides, side{faces.EastFace(k - 1), k - 1, true})
		}
		if i < g.NX-1 {
			sides = append(sides, side{faces.EastFace(k), k + 1, false})
		}
		if j > 0 {
			sides = append(sides, side{faces.NorthFace(k - g.NX), k - g.NX, true})
		}
		if j < g.NY-1 {
			sides = append(sides, side{faces.NorthFace(k), k + g.NX, false})
		}
		diag := 0.0
		inlet, inflow := false, 0.0
		for _, sd := range sides {
			for _, p := range faces.Parts(partBuf[:0], sd.face) {
				mine, other := p.Low, p.High
				if sd.high {
					mine, other = p.High, p.Low
				}
				if int(mine) != piece {
					continue
				}
				if sd.nb < 0 {
					// Inlet: outward flux −U·ℓ on the right-hand side.
					f := s.Speed * g.H * faces.Fraction(sd.face, p)
					if o.Outer == nil {
						sys.B[row] -= f
						inlet, inflow = true, inflow+f
					}
					continue
				}
				if other == mesh.NoPiece {
					return fmt.Errorf("solver: node (%d, %d): an open face part has no cell piece beyond it", i, j)
				}
				alpha := faces.Fraction(sd.face, p)
				// Across a cut the neighbour's value is moved to this row's branch: φ_nb − Δ, with
				// Δ the rise of φ from this side of the face to the other.
				delta := sys.FaceJump(sd.face, 0.5*(p.A+p.B))
				if sd.high {
					delta = -delta
				}
				diag += alpha
				if sys.Dirichlet[sd.nb] {
					sys.B[row] += alpha * (sys.Known(sd.nb) - delta)
					anchored[row] = true
					continue
				}
				if sys.Unknown[sd.nb] < 0 {
					return fmt.Errorf("solver: node (%d, %d): an open face leads to a node without an unknown", i, j)
				}
				bld.Add(int(sys.Unknown[sd.nb])+int(other), -alpha)
				sys.B[row] -= alpha * delta
			}
		}
		if inlet {
			inflowParts[r] = append(inflowParts[r], rowInflow{int32(row), inflow})
		}
		if !(diag > 0) {
			return fmt.Errorf("solver: node (%d, %d): dual-cell piece %d has no open face", i, j, piece)
		}
		bld.Add(row, diag)
		return nil
	})
	if err != nil {
		return nil, err
	}
	sys.A = a
	inflow := slices.Concat(inflowParts...) // in row order: the ranges are
	if err := sys.isolate(anchored, inflow); err != nil {
		return nil, err
	}
	for _, in := range inflow {
		sys.Inflow += in.f
	}
	sys.outer = o.Outer != nil
	return sys, nil
}

// CutLines marks the grid rows and columns whose nodes have a dual-cell face that one of the cuts
// crosses (see Cut.jump: a cut's horizontal part crosses the north faces of row Row, its vertical
// part the east faces of column Col), so that a node (i, j) with neither row[j] nor col[i] set has
// no jump across any of its four faces. Columns are marked whether or not a cut has a vertical
// part.
func CutLines(cuts []Cut, g mesh.Grid) (row, col []bool) {
	row, col = make([]bool, g.NY), make([]bool, g.NX)
	for _, c := range cuts {
		for _, d := range []int{0, 1} {
			if j := c.Row + d; j >= 0 && j < g.NY {
				row[j] = true
			}
			if i := c.Col + d; i >= 0 && i < g.NX {
				col[i] = true
			}
		}
	}
	return row, col
}

// phiDirectRows lets AssemblePhi write the rows of interior cells with four whole faces directly
// (tests turn it off to compare with the general path).
var phiDirectRows = true

// wholeInterior reports whether node (i, j) is inside the grid's outer ring and its four dual-cell
// faces are whole and lead to nodes with unknowns (not prescribed values).
func (sys *PhiSystem) wholeInterior(i, j int) bool {
	g := sys.Mesh.Grid
	if i == 0 || j == 0 || i == g.NX-1 || j == g.NY-1 {
		return false
	}
	k := g.Index(i, j)
	fs := sys.Faces
	if !fs.Whole(fs.EastFace(k-1)) || !fs.Whole(fs.EastFace(k)) || !fs.Whole(fs.NorthFace(k-g.NX)) || !fs.Whole(fs.NorthFace(k)) {
		return false
	}
	for _, nb := range [4]int{k - 1, k + 1, k - g.NX, k + g.NX} {
		if sys.Dirichlet[nb] || sys.Unknown[nb] < 0 {
			return false
		}
	}
	return true
}

// rowInflow is the inflow through the inlet faces of one row (unknown) of the φ system.
type rowInflow struct {
	row int32
	f   float64
}

// isolate finds the unknowns that no chain of open faces joins to a prescribed value and gives
// them identity rows (φ = 0); it fails if inflow (in row order) reaches any of them.
func (sys *PhiSystem) isolate(anchored []bool, inflow []rowInflow) error {
	a := sys.A
	nu := a.Len()
	reached := connectedTo(a, anchored)
	var cbuf [5]int32
	var vbuf [5]float64
	for _, in := range inflow {
		if in.f != 0 && !reached[in.row] {
			k := int(sys.Nodes[in.row])
			g := sys.Mesh.Grid
			return fmt.Errorf("solver: the inflow at (%g, %g) has no path through the fluid to the outlet", g.X(k%g.NX), g.Y(k/g.NX))
		}
	}
	lost := 0
	for _, ok := range reached {
		if !ok {
			lost++
		}
	}
	sys.Isolated = lost
	if lost == 0 {
		return nil
	}
	bld := NewGridBuilder(sys.Mesh.Grid, sys.Nodes, sys.Unknown)
	for u := range nu {
		if !reached[u] {
			bld.Add(u, 1)
			sys.B[u] = 0
		} else {
			cols, vals := a.Row(u, cbuf[:], vbuf[:])
			for q, c := range cols {
				bld.Add(int(c), vals[q])
			}
		}
		bld.EndRow()
	}
	sys.A = bld.Matrix()
	return nil
}

// connectedTo reports for each unknown of a whether a chain of non-zero couplings joins it to an
// unknown marked in anchored: a depth-first search from the anchored unknowns. (A union–find in
// one pass over the rows in memory order took as long on a 16M-cell channel, 0.31–0.33 s against
// 0.28–0.31 s: both wait on memory.)
func connectedTo(a *GridMatrix, anchored []bool) []bool {
	nu := a.Len()
	reached := make([]bool, nu)
	queue := make([]int32, 0, nu)
	for u, ok := range anchored {
		if ok {
			reached[u] = true
			queue = append(queue, int32(u))
		}
	}
	var cbuf [5]int32
	var vbuf [5]float64
	for len(queue) > 0 {
		u := queue[len(queue)-1]
		queue = queue[:len(queue)-1]
		cols, vals := a.Row(int(u), cbuf[:], vbuf[:])
		for q, v := range cols {
			if !reached[v] && vals[q] != 0 {
				reached[v] = true
				queue = append(queue, v)
			}
		}
	}
	return reached
}

// InitialGuess writes the solve's first estimate of the unknowns into dst (of length the number
// of unknowns): the one-dimensional estimate φ = −Q ∫ₓᴸ dx′/h(x′) (h the local channel height;
// exact for a straight empty channel) plus, for each cut that reaches the outlet, the point
// vortex (Γ/2π)θ about the cut's start with θ in (0, 2π) measured from the cut, which has the
// cut's jump; zero under PhiOptions.Outer. It is computed when asked for rather than stored, so
// that the system holds no vector the solution does not need.
func (sys *PhiSystem) InitialGuess(dst []float64) {
	if len(dst) != len(sys.Nodes) {
		panic(fmt.Sprintf("solver: PhiSystem.InitialGuess: len(dst) = %d, want %d", len(dst), len(sys.Nodes)))
	}
	if sys.outer {
		clear(dst)
		return
	}
	m := sys.Mesh
	g := m.Grid
	geo := m.Geom
	q := sys.BC.Q
	col := make([]float64, g.NX)
	inv := func(i int) float64 {
		x := g.X(i)
		h := geo.Upper.Y(x) - geo.Lower.Y(x)
		if !(h > 0) {
			return 0
		}
		return 1 / h
	}
	for i := g.NX - 2; i >= 0; i-- {
		col[i] = col[i+1] - q*g.H*0.5*(inv(i)+inv(i+1))
	}
	par.Rows(len(sys.Nodes), nodeLoopMin, func(_, u0, u1 int) {
		rows := newRowTracker(g.NX, sys.Nodes, u0, u1)
		for u := u0; u < u1; u++ {
			i, j := rows.at(int(sys.Nodes[u]))
			v := col[i]
			p := g.At(i, j)
			for _, c := range sys.Cuts {
				// A cut without circulation would add +0 (col is never −0): skipped.
				if !c.ToOutlet || c.Circulation == 0 {
					continue
				}
				th := math.Atan2(p.Y-c.Y, p.X-c.X0)
				if th < 0 {
					th += 2 * math.Pi
				}
				v += c.Circulation * th / (2 * math.Pi)
			}
			dst[u] = v
		}
	})
}

// PhiSolution is the solved velocity potential.
type PhiSolution struct {
	Sys *PhiSystem
	// Phi holds φ at every node: the value of piece 0 at a node in the fluid, the prescribed
	// value at a prescribed fluid node, 0 at nodes outside the fluid. Across a cut it jumps by
	// the body's circulation (see Cut).
	Phi []float64
	// X holds every unknown, the extended values of nodes outside the fluid included.
	X []float64
	// Stats records the solve; Setup is the time spent building the preconditioner, Solve that
	// of the iterations.
	Stats        Stats
	Setup, Solve time.Duration
}

// SolvePhi solves the φ system by method: MethodKrylov for CG with the Jacobi preconditioner,
// MethodAuto, MethodMG or "" for CG with the symmetric multigrid V-cycle (NewMultigrid; the split
// pieces of a cell share its node and never couple, as it requires) from the system's initial
// guess improved by a full-multigrid pass (Multigrid.Guess; interpolation weights from the
// operator when a body is slender, see slenderBody), MethodSOR for red–black SOR.
// On ErrNotConverged the solution holds the last iterate and the error is returned with it.
func SolvePhi(ctx context.Context, sys *PhiSystem, method string, set *Settings) (*PhiSolution, error) {
	if sys.A == nil {
		return nil, errReleased
	}
	start := time.Now()
	var solve func(x []float64) (Stats, error)
	// The CG work vectors are reserved with the preconditioner, so that Setup, not Solve, pays
	// for fresh memory.
	var ws Workspace
	switch method {
	case MethodKrylov:
		jac := NewJacobi(sys.A)
		ws.ReserveCG(sys.A.Len())
		solve = func(x []float64) (Stats, error) { return ws.CG(ctx, sys.A, sys.B, x, jac, set) }
	case MethodAuto, MethodMG, "":
		// The work vectors come first: the hierarchy forms its coarse operators in them.
		ws.ReserveCG(sys.A.Len())
		mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{Symmetric: true, Scratch: ws.buf, OperatorWeights: slenderBody(sys.Mesh.Geom)})
		if err != nil {
			return nil, fmt.Errorf("velocity potential: %w", err)
		}
		collectLarge(sys.A.Len()) // the hierarchy's set-up garbage, before the solve allocates
		solve = func(x []float64) (Stats, error) {
			// A full-multigrid pass on the initial guess: 11 → 8 iterations on the 4M-cell
			// channel with a cylinder, 12 → 10 on the step, 14 → 13 on the foil (BenchmarkSolvePhi).
			mg.Guess(x, sys.B)
			return ws.CG(ctx, sys.A, sys.B, x, mg, set)
		}
	case MethodSOR:
		g := sys.Mesh.Grid
		red, black := redBlack(sys.Nodes, g.NX)
		omega := OptimalOmegaChannel(g.NX - 1)
		if sys.outer {
			omega = OptimalOmega(g.NX-1, g.NY-1) // φ prescribed on the whole outer ring
		}
		sor := &SOR{Omega: omega, Red: red, Black: black}
		a := sys.A.CSR() // SOR walks CSR rows
		solve = func(x []float64) (Stats, error) { return sor.Solve(ctx, a, sys.B, x, set) }
	default:
		return nil, fmt.Errorf("%w %q (allowed: auto, mgcg, cg, sor)", ErrUnknownMethod, method)
	}
	sol := &PhiSolution{Sys: sys, X: pages.Make[float64](len(sys.Nodes)), Setup: time.Since(start)}
	sys.InitialGuess(sol.X)
	start = time.Now()
	st, err := solve(sol.X)
	sol.Stats = st
	sol.Solve = time.Since(start)
	// The work vectors and the hierarchy go before φ is expanded to the grid, which then reuses
	// their pages instead of mapping fresh ones (a 16M-cell channel's φ stage peaked 130 MB above
	// its ψ stage without this).
	solve = nil
	collectLarge(len(sys.Nodes))
	sol.Phi = sys.expand(sol.X)
	if err != nil {
		return sol, fmt.Errorf("velocity potential: %w", err)
	}
	return sol, nil
}

// slenderQuotient is the isoperimetric quotient 4πA/P² below which a body counts as slender for
// the choice of φ's interpolation (SolvePhi): 1 for a circle, 0.63 for a 3.2:1 ellipse, 0.57 for a
// 4:1 rounded strut, 0.46 for a NACA 0024, 0.25 for a NACA 0012, 0.16 for a 15:1 ellipse.
const slenderQuotient = 0.5

// slenderBody reports whether some body of geo is slender (slenderQuotient). Around slender
// bodies φ's V-cycle interpolates with weights from the operator (MGOptions.OperatorWeights),
// measured in a 0.6 m duct at 135k cells, CG iterations: thin cambered vane 20 → 13, 15:1 ellipse
// 14 → 10, 15:1 plate 13 → 10, NACA 0006 16 → 13, NACA 0012 13 → 11, NACA 0024 11 → 10, and on
// the 1M-cell NACA 2412 passage 13 → 10; around blunt ones bilinear weights do better: cylinder 8
// (10 with the operator's), 3.2:1 ellipse 9 (10), 4:1 rounded strut 10 (10).
func slenderBody(geo *mesh.Geometry) bool {
	for _, b := range geo.Bodies {
		if isoperimetricQuotient(b.Shape) < slenderQuotient {
			return true
		}
	}
	return false
}

// isoperimetricQuotient returns 4πA/P² of shape s from its outline sampled at 1/2000 of its box's
// diagonal: area by the shoelace sum over the samples, perimeter by their arc-length weights.
func isoperimetricQuotient(s mesh.Shape) float64 {
	box := s.Bounds()
	pts := s.Sample(math.Hypot(box.Max.X-box.Min.X, box.Max.Y-box.Min.Y) / 2000)
	area, perimeter := 0.0, 0.0
	for q, sp := range pts {
		next := pts[(q+1)%len(pts)].P
		area += sp.P.X*next.Y - next.X*sp.P.Y
		perimeter += sp.W
	}
	if !(perimeter > 0) {
		return 1
	}
	return 4 * math.Pi * math.Abs(area/2) / (perimeter * perimeter)
}

// Known returns the prescribed value of φ at node k: 0 where none is prescribed. The few
// prescribed nodes keep their values in a map rather than a grid-sized array.
func (sys *PhiSystem) Known(k int) float64 { return sys.known[int32(k)] }

// Release drops the matrix and the right-hand side, which
// only the solves use, so that a run can reuse their memory for the next stage; the maps, faces,
// cuts and prescribed values stay, which is all that reading a solution needs. SolvePhi refuses a
// released system.
func (sys *PhiSystem) Release() {
	sys.A, sys.B = nil, nil
}

// expand returns φ at every node from the unknowns x.
func (sys *PhiSystem) expand(x []float64) []float64 {
	m := sys.Mesh
	phi := pages.Make[float64](m.Len())
	par.Rows(len(phi), nodeLoopMin, func(_, k0, k1 int) {
		for k := k0; k < k1; k++ {
			switch {
			case !m.IsFluid(k):
			case sys.Unknown[k] >= 0:
				phi[k] = x[sys.Unknown[k]]
			case sys.Dirichlet[k]:
				phi[k] = sys.Known(k)
			}
		}
	})
	return phi
}

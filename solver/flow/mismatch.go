package flow

import (
	"fmt"
	"math"
	"slices"
	"sync"

	"phipsi/internal/par"
	"phipsi/mesh"
	"phipsi/solver"
)

// PhiVelocity computes u = ∂φ/∂x and v = ∂φ/∂y (and speed, Cp, pressure) at every fluid node of
// the φ solution. A derivative uses the neighbours joined to the node by whole grid links (no
// boundary between them): the central difference when there is one on each side; the one-sided
// three-point difference (−3φ₀ + 4φ₁ − φ₂)/(2H) when one side has two in a row; the two-point one
// when it has just one; and, where a boundary lies on both sides, the values the finite-volume
// system extends across the faces. On the inlet u is the imposed U. Across a branch cut the
// neighbour's value is moved to the node's branch (PhiSystem.FaceJump), so the velocity is
// smooth there. Speeds next to walls and bodies are therefore less accurate than ψ's surface
// fits; take wall pressures from ψ.
func PhiVelocity(sol *solver.PhiSolution, fl Fluid) *Field {
	sys := sol.Sys
	m := sys.Mesh
	g := m.Grid
	n := g.Len()
	f := &Field{Grid: g, Valid: make([]bool, n), U: make([]float64, n), V: make([]float64, n),
		Speed: make([]float64, n), Cp: make([]float64, n), Pressure: make([]float64, n)}
	U := sys.BC.Speed
	pn := phiNodes{sol: sol, g: g}
	for j := range g.NY {
		for i := range g.NX {
			k := g.Index(i, j)
			u, v, ok := pn.velocity(i, j)
			if !ok {
				continue
			}
			sp := math.Hypot(u, v)
			f.Valid[k] = true
			f.U[k], f.V[k], f.Speed[k] = u, v, sp
			f.Cp[k] = 1 - (sp/U)*(sp/U)
			f.Pressure[k] = fl.Pressure + 0.5*fl.Density*(U*U-sp*sp)
		}
	}
	return f
}

// phiNodes reads a φ solution node by node.
type phiNodes struct {
	sol   *solver.PhiSolution
	g     mesh.Grid
	parts []mesh.FacePart
}

var phiSteps = [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}

// velocity returns the velocity ∇φ at node (i, j) by central differences, and false at a node
// without a value.
func (p *phiNodes) velocity(i, j int) (u, v float64, ok bool) {
	k := p.g.Index(i, j)
	if !p.has(k) {
		return 0, 0, false
	}
	sys := p.sol.Sys
	h := p.g.H
	if i == 0 && !sys.Dirichlet[k] {
		u = sys.BC.Speed // the inlet condition ∂φ/∂x = U
	} else {
		u = p.derivative(i, j, mesh.East, mesh.West) / h
	}
	v = p.derivative(i, j, mesh.North, mesh.South) / h
	return u, v, true
}

// velocityFast is velocity at node (i, j); uncut says that no branch cut crosses the node's four
// faces. An interior node with whole arms, four neighbours with values and no cut on its faces
// takes the central differences directly (the same bits as velocity); any other node takes
// velocity.
func (p *phiNodes) velocityFast(i, j int, uncut bool) (u, v float64, ok bool) {
	g := p.g
	if !uncut || i == 0 || j == 0 || i == g.NX-1 || j == g.NY-1 {
		return p.velocity(i, j)
	}
	k := g.Index(i, j)
	if _, cut := p.sol.Sys.Mesh.Arms(k); cut || !p.has(k) || !p.has(k-1) || !p.has(k+1) || !p.has(k-g.NX) || !p.has(k+g.NX) {
		return p.velocity(i, j)
	}
	phi := p.sol.Phi
	h := g.H
	return (phi[k+1] - phi[k-1]) / 2 / h, (phi[k+g.NX] - phi[k-g.NX]) / 2 / h, true
}

// has reports whether node k is a fluid node with a value.
func (p *phiNodes) has(k int) bool {
	sys := p.sol.Sys
	return sys.Mesh.IsFluid(k) && (sys.Unknown[k] >= 0 || sys.Dirichlet[k])
}

// face returns the face between node (i, j) and its neighbour in direction d, and whether the
// node lies on the face's high side.
func (p *phiNodes) face(i, j, d int) (int, bool) {
	fs := p.sol.Sys.Faces
	k := p.g.Index(i, j)
	switch d {
	case mesh.East:
		return fs.EastFace(k), false
	case mesh.West:
		return fs.EastFace(k - 1), true
	case mesh.North:
		return fs.NorthFace(k), false
	}
	return fs.NorthFace(k - p.g.NX), true
}

// rise returns how much φ rises across the cuts from node (i, j)'s side of the face in direction
// d to the neighbour's, at along-face coordinate at.
func (p *phiNodes) rise(i, j, d int, at float64) float64 {
	f, high := p.face(i, j, d)
	r := p.sol.Sys.FaceJump(f, at)
	if high {
		return -r
	}
	return r
}

// step returns the neighbour of node (i, j) in direction d and its φ moved to the branch of
// (i, j), when a whole grid link joins two fluid nodes with values.
func (p *phiNodes) step(i, j, d int) (ni, nj int, phi float64, ok bool) {
	g := p.g
	ni, nj = i+phiSteps[d][0], j+phiSteps[d][1]
	if ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY {
		return 0, 0, 0, false
	}
	if arms, _ := p.sol.Sys.Mesh.Arms(g.Index(i, j)); arms[d].Boundary != mesh.NoBoundary {
		return 0, 0, 0, false
	}
	q := g.Index(ni, nj)
	if !p.has(q) {
		return 0, 0, 0, false
	}
	at := g.X(i) // the link's midpoint along a north face…
	if d == mesh.East || d == mesh.West {
		at = g.Y(j) // …or along an east face
	}
	return ni, nj, p.sol.Phi[q] - p.rise(i, j, d, at), true
}

// extended returns the value the system couples node (i, j)'s piece 0 to across the face in
// direction d (that of the face's largest open part), moved to the node's branch.
func (p *phiNodes) extended(i, j, d int) (float64, bool) {
	g := p.g
	sys := p.sol.Sys
	ni, nj := i+phiSteps[d][0], j+phiSteps[d][1]
	if ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY {
		return 0, false
	}
	fc, high := p.face(i, j, d)
	p.parts = sys.Faces.Parts(p.parts[:0], fc)
	best, piece, at := 0.0, -1, 0.0
	for _, part := range p.parts {
		mine, other := part.Low, part.High
		if high {
			mine, other = part.High, part.Low
		}
		if mine == 0 && part.B-part.A > best {
			best, piece, at = part.B-part.A, int(other), 0.5*(part.A+part.B)
		}
	}
	q := g.Index(ni, nj)
	switch {
	case piece < 0 || piece == mesh.NoPiece:
		return 0, false
	case sys.Dirichlet[q]:
		return sys.Known(q) - p.rise(i, j, d, at), true
	case sys.Unknown[q] >= 0:
		return p.sol.X[int(sys.Unknown[q])+piece] - p.rise(i, j, d, at), true
	}
	return 0, false
}

// derivative returns H·∂φ/∂s at node (i, j) along the direction plus (minus its opposite).
func (p *phiNodes) derivative(i, j, plus, minus int) float64 {
	f0 := p.sol.Phi[p.g.Index(i, j)]
	pi, pj, fp, okp := p.step(i, j, plus)
	mi, mj, fm, okm := p.step(i, j, minus)
	switch {
	case okp && okm:
		return (fp - fm) / 2
	case okp:
		if _, _, f2, ok := p.step(pi, pj, plus); ok {
			f2 += fp - p.sol.Phi[p.g.Index(pi, pj)] // the first link's branch shift applies too
			return (-3*f0 + 4*fp - f2) / 2
		}
		return fp - f0
	case okm:
		if _, _, f2, ok := p.step(mi, mj, minus); ok {
			f2 += fm - p.sol.Phi[p.g.Index(mi, mj)]
			return (3*f0 - 4*fm + f2) / 2
		}
		return f0 - fm
	}
	fp, okp = p.extended(i, j, plus)
	fm, okm = p.extended(i, j, minus)
	switch {
	case okp && okm:
		return (fp - fm) / 2
	case okp:
		return fp - f0
	case okm:
		return f0 - fm
	}
	return 0
}

// MismatchDistance is how far, in grid spacings, a node must lie from every boundary (walls,
// bodies, inlet and outlet) to count in Mismatch.
const MismatchDistance = 2

// Mismatch returns the Cauchy–Riemann cross-check of a run: the largest |V_φ − V_ψ| / U over the
// fluid nodes at least MismatchDistance spacings from every boundary, with V_ψ = (∂ψ/∂y, −∂ψ/∂x)
// from r and V_φ = (∂φ/∂x, ∂φ/∂y) from phi (PhiVelocity). Both are central differences there, so
// the mismatch falls like H² and measures the discretisation error of the two solutions. It fails
// if phi was solved on another grid or no node is far enough from the boundaries.
func Mismatch(r *Result, phi *solver.PhiSolution) (float64, error) {
	w, err := MismatchAt(r, phi)
	return w.Value, err
}

// WorstMismatch is the largest φ/ψ velocity mismatch of a run and where it lies.
type WorstMismatch struct {
	Value float64    // |V_φ − V_ψ| / U
	At    mesh.Point // the node (the first in node order with that value)
	Near  string     // the name of the wall or body nearest to At
}

// MismatchAt is Mismatch with where the largest mismatch lies.
func MismatchAt(r *Result, phi *solver.PhiSolution) (WorstMismatch, error) {
	m := r.Sol.Sys.Mesh
	if phi.Sys.Mesh.Grid != m.Grid {
		return WorstMismatch{}, fmt.Errorf("flow: φ was solved on a %d×%d grid, ψ on %d×%d", phi.Sys.Mesh.NX, phi.Sys.Mesh.NY, m.NX, m.NY)
	}
	away := awayFromBoundaries(m, MismatchDistance)
	g := m.Grid
	// Rows and columns whose nodes have a face on a branch cut take the general path.
	cutRow, cutCol := solver.CutLines(phi.Sys.Cuts, g)
	type worstOf struct {
		d2, du, dv float64 // |V_φ − V_ψ|² and its parts
		at, count  int
	}
	nr := par.Ranges(g.NY, parallelRows)
	worsts := make([]worstOf, nr)
	par.Rows(g.NY, parallelRows, func(r0, j0, j1 int) {
		pn := phiNodes{sol: phi, g: g}
		w := worstOf{at: -1}
		for j := j0; j < j1; j++ {
			for i := range g.NX {
				k := j*g.NX + i
				if !away[k] || !r.Field.Valid[k] {
					continue
				}
				u, v, ok := pn.velocityFast(i, j, !cutRow[j] && !cutCol[i])
				if !ok {
					continue
				}
				w.count++
				du, dv := u-r.Field.U[k], v-r.Field.V[k]
				if d2 := du*du + dv*dv; d2 > w.d2 || w.at < 0 {
					w.d2, w.du, w.dv, w.at = d2, du, dv, k
				}
			}
		}
		worsts[r0] = w
	})
	worst := worstOf{at: -1}
	count := 0
	for _, w := range worsts {
		if w.at >= 0 && (worst.at < 0 || w.d2 > worst.d2) {
			worst = w
		}
		count += w.count
	}
	if count == 0 {
		return WorstMismatch{}, fmt.Errorf("flow: no fluid node lies %d spacings from every boundary; refine the grid", MismatchDistance)
	}
	at := worst.at
	value := math.Hypot(worst.du, worst.dv) / r.Speed
	p := g.At(at%g.NX, at/g.NX)
	return WorstMismatch{Value: value, At: p, Near: nearestBoundary(m, p)}, nil
}

// nearestBoundary returns the name of the wall or body nearest to p, measured to their samples
// at spacing H.
func nearestBoundary(m *mesh.Mesh, p mesh.Point) string {
	best, name := math.Inf(1), ""
	for id := range m.NumBoundaries() {
		for _, sp := range m.Sample(id, m.H) {
			if d := sp.P.Sub(p).Norm(); d < best {
				best, name = d, m.BoundaryName(id)
			}
		}
	}
	return name
}

// awayFromBoundaries marks the fluid nodes at least dist·H from the inlet, the outlet and every
// wall and body. Distances to walls and bodies are measured to their samples at spacing H/16,
// which overstates a distance of 2H by less than 0.001H.
func awayFromBoundaries(m *mesh.Mesh, dist float64) []bool {
	g := m.Grid
	h := g.H
	r := dist * h
	away := make([]bool, g.Len())
	x0, x1 := g.X0+r, g.X(g.NX-1)-r
	// The boundaries are sampled at once, one goroutine each (a fine grid's walls carry
	// hundreds of thousands of samples).
	each := make([][]mesh.SurfacePoint, m.NumBoundaries())
	var wg sync.WaitGroup
	for id := range each {
		wg.Go(func() { each[id] = m.Sample(id, h/16) })
	}
	wg.Wait()
	samples := slices.Concat(each...)
	r2 := r * (1 - 1e-9) * r * (1 - 1e-9) // squared, to compare without square roots
	// Each range of rows marks its own nodes, looking at every sample near them.
	par.Rows(g.NY, parallelRows, func(_, ja, jb int) {
		for j := ja; j < jb; j++ {
			for i := range g.NX {
				k := g.Index(i, j)
				x := g.X(i)
				away[k] = m.IsFluid(k) && x >= x0-1e-9*h && x <= x1+1e-9*h
			}
		}
		for _, sp := range samples {
			p := sp.P
			j0 := max(ja, int(math.Floor((p.Y-r-g.Y0)/h)))
			j1 := min(jb-1, int(math.Ceil((p.Y+r-g.Y0)/h)))
			if j0 > j1 {
				continue
			}
			i0 := max(0, int(math.Floor((p.X-r-g.X0)/h)))
			i1 := min(g.NX-1, int(math.Ceil((p.X+r-g.X0)/h)))
			for j := j0; j <= j1; j++ {
				dy := g.Y(j) - p.Y
				row := away[g.Index(i0, j) : g.Index(i1, j)+1]
				for q := range row {
					if dx := g.X(i0+q) - p.X; dx*dx+dy*dy < r2 {
						row[q] = false
					}
				}
			}
		}
	})
	return away
}

package flow

import (
	"fmt"
	"math"

	"phipsi/mesh"
	"phipsi/solver"
)

// PhiVelocity computes u = ∂φ/∂x and v = ∂φ/∂y (and speed, Cp, pressure) at every fluid node of
// the φ solution. A derivative uses the neighbours joined to the node by whole grid links (no
// boundary between them): the central difference when both are, second order; the one-sided
// difference when one is, first order; and, where a boundary lies on both sides, the values the
// finite-volume system extends across the faces. Across a branch cut the neighbour's value is
// moved to the node's branch (PhiSystem.FaceJump), so the velocity is smooth there. Speeds near
// walls and bodies are therefore less accurate than ψ's surface fits; take wall pressures from ψ.
func PhiVelocity(sol *solver.PhiSolution, fl Fluid) *Field {
	sys := sol.Sys
	m := sys.Mesh
	g := m.Grid
	n := g.Len()
	f := &Field{Grid: g, Valid: make([]bool, n), U: make([]float64, n), V: make([]float64, n),
		Speed: make([]float64, n), Cp: make([]float64, n), Pressure: make([]float64, n)}
	U := sys.BC.Speed
	h := g.H
	phi := sol.Phi
	has := func(k int) bool { return m.IsFluid(k) && (sys.Unknown[k] >= 0 || sys.Dirichlet[k]) }
	steps := [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
	var parts []mesh.FacePart
	for j := range g.NY {
		for i := range g.NX {
			k := g.Index(i, j)
			if !has(k) {
				continue
			}
			arms, _ := m.Arms(k)
			// face returns the face between node k and its neighbour in direction d and whether
			// node k is on its high side.
			face := func(d int) (int, bool) {
				switch d {
				case mesh.East:
					return sys.Faces.EastFace(k), false
				case mesh.West:
					return sys.Faces.EastFace(k - 1), true
				case mesh.North:
					return sys.Faces.NorthFace(k), false
				}
				return sys.Faces.NorthFace(k - g.NX), true
			}
			// rise returns how much φ rises across the cuts from node k's side of the face in
			// direction d to the neighbour's, at along-face coordinate at.
			rise := func(d int, at float64) float64 {
				f, high := face(d)
				r := sys.FaceJump(f, at)
				if high {
					return -r
				}
				return r
			}
			// along is the coordinate of the grid link's midpoint along the face in direction d.
			along := func(d int) float64 {
				if d == mesh.East || d == mesh.West {
					return g.Y(j)
				}
				return g.X(i)
			}
			// whole returns the neighbour's φ across a whole link.
			whole := func(d int) (float64, bool) {
				ni, nj := i+steps[d][0], j+steps[d][1]
				if ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY || arms[d].Boundary != mesh.NoBoundary {
					return 0, false
				}
				q := g.Index(ni, nj)
				if !has(q) {
					return 0, false
				}
				return phi[q] - rise(d, along(d)), true
			}
			// extended returns the value the system couples node k's piece 0 to across the face
			// in direction d (the largest open part's), when there is one.
			extended := func(d int) (float64, bool) {
				ni, nj := i+steps[d][0], j+steps[d][1]
				if ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY {
					return 0, false
				}
				fc, high := face(d)
				parts = sys.Faces.Parts(parts[:0], fc)
				best, piece, at := 0.0, -1, 0.0
				for _, p := range parts {
					mine, other := p.Low, p.High
					if high {
						mine, other = p.High, p.Low
					}
					if mine == 0 && p.B-p.A > best {
						best, piece, at = p.B-p.A, int(other), 0.5*(p.A+p.B)
					}
				}
				q := g.Index(ni, nj)
				switch {
				case piece < 0 || piece == mesh.NoPiece:
					return 0, false
				case sys.Dirichlet[q]:
					return sys.Known[q] - rise(d, at), true
				case sys.Unknown[q] >= 0:
					return sol.X[int(sys.Unknown[q])+piece] - rise(d, at), true
				}
				return 0, false
			}
			deriv := func(plus, minus int) float64 {
				f0 := phi[k]
				fp, okp := whole(plus)
				fm, okm := whole(minus)
				switch {
				case okp && okm:
					return (fp - fm) / (2 * h)
				case okp:
					return (fp - f0) / h
				case okm:
					return (f0 - fm) / h
				}
				fp, okp = extended(plus)
				fm, okm = extended(minus)
				switch {
				case okp && okm:
					return (fp - fm) / (2 * h)
				case okp:
					return (fp - f0) / h
				case okm:
					return (f0 - fm) / h
				}
				return 0
			}
			u := deriv(mesh.East, mesh.West)
			v := deriv(mesh.North, mesh.South)
			sp := math.Hypot(u, v)
			f.Valid[k] = true
			f.U[k], f.V[k], f.Speed[k] = u, v, sp
			f.Cp[k] = 1 - (sp/U)*(sp/U)
			f.Pressure[k] = fl.Pressure + 0.5*fl.Density*(U*U-sp*sp)
		}
	}
	return f
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
	m := r.Sol.Sys.Mesh
	if phi.Sys.Mesh.Grid != m.Grid {
		return 0, fmt.Errorf("flow: φ was solved on a %d×%d grid, ψ on %d×%d", phi.Sys.Mesh.NX, phi.Sys.Mesh.NY, m.NX, m.NY)
	}
	pf := PhiVelocity(phi, r.Fluid)
	away := awayFromBoundaries(m, MismatchDistance)
	worst, count := 0.0, 0
	for k, ok := range away {
		if !ok || !r.Field.Valid[k] || !pf.Valid[k] {
			continue
		}
		count++
		d := math.Hypot(pf.U[k]-r.Field.U[k], pf.V[k]-r.Field.V[k]) / r.Speed
		worst = math.Max(worst, d)
	}
	if count == 0 {
		return 0, fmt.Errorf("flow: no fluid node lies %d spacings from every boundary; refine the grid", MismatchDistance)
	}
	return worst, nil
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
	for k := range away {
		x := g.X(k % g.NX)
		away[k] = m.IsFluid(k) && x >= x0-1e-9*h && x <= x1+1e-9*h
	}
	for id := range m.NumBoundaries() {
		for _, sp := range m.Sample(id, h/16) {
			p := sp.P
			i0 := max(0, int(math.Floor((p.X-r-g.X0)/h)))
			i1 := min(g.NX-1, int(math.Ceil((p.X+r-g.X0)/h)))
			j0 := max(0, int(math.Floor((p.Y-r-g.Y0)/h)))
			j1 := min(g.NY-1, int(math.Ceil((p.Y+r-g.Y0)/h)))
			for j := j0; j <= j1; j++ {
				for i := i0; i <= i1; i++ {
					if g.At(i, j).Sub(p).Norm() < r*(1-1e-9) {
						away[g.Index(i, j)] = false
					}
				}
			}
		}
	}
	return away
}

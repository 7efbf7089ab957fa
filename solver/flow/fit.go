package flow

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"phipsi/mesh"
)

// fitRadius is the neighbourhood of a harmonic fit, in grid spacings: about 20 nodes around a wall
// point, enough for a cubic with room to spare.
const fitRadius = 2.6

// constraintWeight is the weight of the boundary-value row in a wall fit, relative to the nodes'
// weights of at most 1: the fit passes through the known ψ on the wall almost exactly.
const constraintWeight = 1e3

// harmonicBasis evaluates the harmonic polynomials up to cubic at (x, y) (scaled by H):
// 1, x, y, x² − y², 2xy, x³ − 3xy², 3x²y − y³. Each solves Laplace's equation exactly, so the fit
// cannot absorb a non-harmonic error into its gradient.
func harmonicBasis(dst []float64, x, y float64) {
	dst[0] = 1
	dst[1] = x
	dst[2] = y
	if len(dst) > 3 {
		dst[3] = x*x - y*y
		dst[4] = 2 * x * y
	}
	if len(dst) > 5 {
		dst[5] = x*x*x - 3*x*y*y
		dst[6] = 3*x*x*y - y*y*y
	}
}

// fitter fits harmonic polynomials to ψ around points of a mesh. Its buffers are reused between
// fits; a fitter is not safe for concurrent use.
type fitter struct {
	m    *mesh.Mesh
	psi  []float64
	rows [][3]float64 // ξ, η, value
	wts  []float64
	hits []mesh.Hit
}

func newFitter(m *mesh.Mesh, psi []float64) *fitter { return &fitter{m: m, psi: psi} }

// gradient returns ∇ψ at p from a weighted least-squares fit of harmonic polynomials to the fluid
// nodes within fitRadius·H that can see p (no boundary between them), with weights 1/(1 + r²/H²).
// With constrained, the row ψ(p) = value enters with weight constraintWeight (p on a boundary
// with known ψ). ok is false when too few nodes are visible for even a linear fit.
func (f *fitter) gradient(p mesh.Point, constrained bool, value float64, eye mesh.Point) (gx, gy float64, nodes int, ok bool) {
	m := f.m
	g := m.Grid
	h := g.H
	r := fitRadius * h
	i0 := max(0, int(math.Floor((p.X-r-g.X0)/h)))
	i1 := min(g.NX-1, int(math.Ceil((p.X+r-g.X0)/h)))
	j0 := max(0, int(math.Floor((p.Y-r-g.Y0)/h)))
	j1 := min(g.NY-1, int(math.Ceil((p.Y+r-g.Y0)/h)))
	f.rows = f.rows[:0]
	f.wts = f.wts[:0]
	for j := j0; j <= j1; j++ {
		for i := i0; i <= i1; i++ {
			k := g.Index(i, j)
			if !m.IsFluid(k) {
				continue
			}
			q := g.At(i, j)
			d := q.Sub(p)
			if d.Norm() > r {
				continue
			}
			// Visible from a point just off the boundary on the fluid side.
			if !m.Visible(eye, q, 1e-9) {
				continue
			}
			xi, eta := d.X/h, d.Y/h
			f.rows = append(f.rows, [3]float64{xi, eta, f.psi[k]})
			f.wts = append(f.wts, 1/(1+xi*xi+eta*eta))
		}
	}
	nodes = len(f.rows)
	extra := 0
	if constrained {
		extra = 1
	}
	// A wall point sees about half of the disk, some ten nodes: the cubic (7 terms) is kept while
	// the rows outnumber its terms by two, then the quadratic, then the linear fit. Dropping to the
	// quadratic too early costs a factor four in wall-speed error at these resolutions.
	var nb int
	switch {
	case nodes+extra >= 9:
		nb = 7
	case nodes+extra >= 6:
		nb = 5
	case nodes+extra >= 4:
		nb = 3
	default:
		return 0, 0, nodes, false
	}
	a := mat.NewDense(nodes+extra, nb, nil)
	b := mat.NewVecDense(nodes+extra, nil)
	basis := make([]float64, nb)
	for q, row := range f.rows {
		harmonicBasis(basis, row[0], row[1])
		w := f.wts[q]
		for c := range nb {
			a.Set(q, c, w*basis[c])
		}
		b.SetVec(q, w*row[2])
	}
	if constrained {
		harmonicBasis(basis, 0, 0)
		for c := range nb {
			a.Set(nodes, c, constraintWeight*basis[c])
		}
		b.SetVec(nodes, constraintWeight*value)
	}
	var qr mat.QR
	qr.Factorize(a)
	var c mat.VecDense
	if err := qr.SolveVecTo(&c, false, b); err != nil {
		return 0, 0, nodes, false
	}
	gx, gy = c.AtVec(1)/h, c.AtVec(2)/h
	if math.IsNaN(gx) || math.IsNaN(gy) || math.IsInf(gx, 0) || math.IsInf(gy, 0) {
		return 0, 0, nodes, false
	}
	return gx, gy, nodes, true
}

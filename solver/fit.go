package solver

import (
	"math"

	"gonum.org/v1/gonum/mat"

	"phipsi/mesh"
)

// FitRadius is the neighbourhood of a harmonic fit, in grid spacings: a wall point sees about ten
// fluid nodes within it, a point in the open about twenty.
const FitRadius = 2.6

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

// Stencil is the gradient at one point of a weighted least-squares fit of harmonic polynomials,
// as a linear function of the data: ∇ψ = Σ_m (GX[m], GY[m])·ψ(Nodes[m]) + (CX, CY)·ψ_b, where
// ψ_b is the boundary value of a constrained fit.
type Stencil struct {
	Nodes  []int32
	GX, GY []float64
	CX, CY float64
}

// Gradient applies the stencil to a nodal field and a boundary value.
func (s *Stencil) Gradient(psi []float64, boundary float64) (gx, gy float64) {
	gx, gy = s.CX*boundary, s.CY*boundary
	for m, k := range s.Nodes {
		gx += s.GX[m] * psi[k]
		gy += s.GY[m] * psi[k]
	}
	return gx, gy
}

// HarmonicStencil returns the fit stencil at p from the fluid nodes within FitRadius·H that can be
// seen from eye (a point just off the boundary on the fluid side, or p itself), weights
// 1/(1 + r²/H²). With constrained, the row ψ(p) = ψ_b enters with weight 1e3 (p on a boundary of
// known ψ). The cubic (7 terms) is used while the rows outnumber its terms by two, then the
// quadratic, then the linear fit; ok is false when too few nodes are visible for any.
func HarmonicStencil(m *mesh.Mesh, p, eye mesh.Point, constrained bool) (Stencil, bool) {
	g := m.Grid
	h := g.H
	r := FitRadius * h
	i0 := max(0, int(math.Floor((p.X-r-g.X0)/h)))
	i1 := min(g.NX-1, int(math.Ceil((p.X+r-g.X0)/h)))
	j0 := max(0, int(math.Floor((p.Y-r-g.Y0)/h)))
	j1 := min(g.NY-1, int(math.Ceil((p.Y+r-g.Y0)/h)))
	var st Stencil
	var xs, ys, ws []float64
	for j := j0; j <= j1; j++ {
		for i := i0; i <= i1; i++ {
			k := g.Index(i, j)
			if !m.IsFluid(k) {
				continue
			}
			q := g.At(i, j)
			d := q.Sub(p)
			if d.Norm() > r || !m.Visible(eye, q, 1e-9) {
				continue
			}
			xi, eta := d.X/h, d.Y/h
			st.Nodes = append(st.Nodes, int32(k))
			xs, ys = append(xs, xi), append(ys, eta)
			ws = append(ws, 1/(1+xi*xi+eta*eta))
		}
	}
	n := len(st.Nodes)
	rows := n
	if constrained {
		rows++
		xs, ys = append(xs, 0), append(ys, 0)
		ws = append(ws, constraintWeight)
	}
	var nb int
	switch {
	case rows >= 9:
		nb = 7
	case rows >= 6:
		nb = 5
	case rows >= 4:
		nb = 3
	default:
		return Stencil{}, false
	}
	a := mat.NewDense(rows, nb, nil)
	basis := make([]float64, nb)
	for q := range rows {
		harmonicBasis(basis, xs[q], ys[q])
		for c := range nb {
			a.Set(q, c, ws[q]*basis[c])
		}
	}
	// With A_w = QR, the coefficient c_i = (Q R⁻ᵀ e_i)·(W d): solve Rᵀ y = e_i for the two
	// gradient coefficients and map back through Q and the weights.
	var qr mat.QR
	qr.Factorize(a)
	var q, rr mat.Dense
	qr.QTo(&q)
	qr.RTo(&rr)
	weights := func(i int) ([]float64, bool) {
		y := make([]float64, nb)
		for c := range nb {
			s := 0.0
			if c == i {
				s = 1
			}
			for k := range c {
				s -= rr.At(k, c) * y[k]
			}
			d := rr.At(c, c)
			if math.Abs(d) < 1e-12 {
				return nil, false
			}
			y[c] = s / d
		}
		out := make([]float64, rows)
		for row := range rows {
			s := 0.0
			for c := range nb {
				s += q.At(row, c) * y[c]
			}
			out[row] = s * ws[row] / h
		}
		return out, true
	}
	gx, okx := weights(1)
	gy, oky := weights(2)
	if !okx || !oky {
		return Stencil{}, false
	}
	st.GX, st.GY = gx[:n], gy[:n]
	if constrained {
		st.CX, st.CY = gx[n], gy[n]
	}
	return st, true
}

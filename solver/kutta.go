package solver

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"phipsi/mesh"
)

// kuttaModes is the number of corner-flow modes fitted near a trailing edge.
const kuttaModes = 5

// kuttaFit is the least-squares fit of corner-flow modes to ψ − C near one trailing edge. Around
// a corner whose fluid side opens by β = 2π − τ (τ the edge's interior angle), the harmonic
// functions that vanish on both faces are r^{kλ} sin(kλφ′), λ = π/β, φ′ measured from the upper
// face through the fluid. The first mode (λ < 1) has a velocity that grows like r^{λ−1}: the
// Kutta condition asks its coefficient a₁ to vanish, so the flow leaves the edge smoothly.
// Requiring ψ at one point behind the edge to equal the body's value is only first order; the
// mode fit holds the lift to a fraction of a per cent from about 50 cells per chord.
type kuttaFit struct {
	nodes []int32
	qr    mat.QR
	w     []float64 // square roots of the weights
	n     int
}

// newKuttaFit selects the fluid nodes within radius R of the trailing edge of body b that can see
// it, and factorises the weighted mode matrix. R is 5 % of the body's size or 4 grid spacings,
// whichever is larger.
func newKuttaFit(sys *PsiSystem, b int) (*kuttaFit, error) {
	m := sys.Mesh
	g := m.Grid
	te := sys.BC.TrailingEdges[b]
	name := m.Geom.Bodies[b].Name
	if !te.Set {
		return nil, fmt.Errorf("body %q: no trailing edge for the Kutta condition", name)
	}
	box := m.Geom.Bodies[b].Shape.Bounds()
	size := math.Max(box.Max.X-box.Min.X, box.Max.Y-box.Min.Y)
	R := math.Max(0.05*size, 4*g.H)
	beta := 2*math.Pi - te.Angle
	lambda := math.Pi / beta
	upper := math.Atan2(te.Out.Y, te.Out.X) // the face leaving the corner counter-clockwise
	eye := te.P.Add(te.Bisector.Scale(1e-9 * g.H))
	i0 := max(0, int(math.Floor((te.P.X-R-g.X0)/g.H)))
	i1 := min(g.NX-1, int(math.Ceil((te.P.X+R-g.X0)/g.H)))
	j0 := max(0, int(math.Floor((te.P.Y-R-g.Y0)/g.H)))
	j1 := min(g.NY-1, int(math.Ceil((te.P.Y+R-g.Y0)/g.H)))
	f := &kuttaFit{}
	var rows [][kuttaModes]float64
	for j := j0; j <= j1; j++ {
		for i := i0; i <= i1; i++ {
			k := g.Index(i, j)
			if !m.IsFluid(k) {
				continue
			}
			p := g.At(i, j)
			d := p.Sub(te.P)
			r := d.Norm()
			if r > R || r < 1e-9*g.H || !m.Visible(eye, p, 1e-9) {
				continue
			}
			// φ′ runs clockwise from the upper face through the fluid to the lower face.
			phi := math.Mod(upper-math.Atan2(d.Y, d.X)+4*math.Pi, 2*math.Pi)
			if phi <= 0 || phi >= beta {
				continue
			}
			var row [kuttaModes]float64
			rho := r / R
			for q := range kuttaModes {
				kl := float64(q+1) * lambda
				row[q] = math.Pow(rho, kl) * math.Sin(kl*phi)
			}
			rows = append(rows, row)
			f.nodes = append(f.nodes, int32(k))
			// Uniform weights: every node near the edge carries the same information.
			f.w = append(f.w, 1)
		}
	}
	f.n = len(rows)
	if f.n < 2*kuttaModes {
		return nil, fmt.Errorf("body %q: only %d fluid nodes near its trailing edge, need %d for the Kutta condition; refine the grid", name, f.n, 2*kuttaModes)
	}
	a := mat.NewDense(f.n, kuttaModes, nil)
	for r, row := range rows {
		for c := range kuttaModes {
			a.Set(r, c, f.w[r]*row[c])
		}
	}
	f.qr.Factorize(a)
	return f, nil
}

// a1 returns the singular mode's coefficient of a fit to the node values val(node).
func (f *kuttaFit) a1(val func(node int) float64) (float64, error) {
	d := mat.NewVecDense(f.n, nil)
	for r, k := range f.nodes {
		d.SetVec(r, f.w[r]*val(int(k)))
	}
	var c mat.VecDense
	if err := f.qr.SolveVecTo(&c, false, d); err != nil {
		return 0, fmt.Errorf("solver: Kutta fit: %w", err)
	}
	return c.AtVec(0), nil
}

// fieldValue returns node k's value in the superposition field j: the unknown vector x where the
// node is an unknown, else the node's known value in that field (j < 0: the base field with every
// body at 0; j ≥ 0: body j at 1, everything else 0).
func (sys *PsiSystem) fieldValue(x []float64, j, k int) float64 {
	if u := sys.Unknown[k]; u >= 0 {
		return x[u]
	}
	m := sys.Mesh
	owner := int(m.Owner[k])
	if m.Kind[k] == mesh.Fluid { // inlet or outer node: known data, base field only
		if j >= 0 {
			return 0
		}
		return sys.knownNode(k%m.NX, k/m.NX)
	}
	if owner >= 2 {
		if owner-2 == j {
			return 1
		}
		return 0
	}
	if j >= 0 {
		return 0
	}
	return sys.knownValue(owner, m.At(k%m.NX, k/m.NX), 0)
}

// kuttaRow returns body b's Kutta condition as a row of the constants' system: with
// ψ − C_b = ψ₀ + Σ_j C_j ψ_j − C_b and a₁ linear in the data,
// Σ_j C_j (a₁(ψ_j) − δ_jb a₁(1)) = −a₁(ψ₀).
func (sys *PsiSystem) kuttaRow(b int, x0 []float64, xk [][]float64) ([]float64, float64, error) {
	f, err := newKuttaFit(sys, b)
	if err != nil {
		return nil, 0, err
	}
	row := make([]float64, len(xk))
	for j := range xk {
		if row[j], err = f.a1(func(k int) float64 { return sys.fieldValue(xk[j], j, k) }); err != nil {
			return nil, 0, err
		}
	}
	one, err := f.a1(func(int) float64 { return 1 })
	if err != nil {
		return nil, 0, err
	}
	row[b] -= one
	base, err := f.a1(func(k int) float64 { return sys.fieldValue(x0, -1, k) })
	if err != nil {
		return nil, 0, err
	}
	return row, -base, nil
}

package solver

import (
	"fmt"

	"phipsi/mesh"
)

// contour measures a body's circulation Γ = ∮ v·ds (counter-clockwise positive) as a linear
// function of the nodal ψ and the body's own constant: Γ = Σ W[m]·ψ(Nodes[m]) + Self·ψ_body.
//
// The preferred form is a closed staircase of grid links around the body, each joining a node
// inside it to one outside, both ends and every node between the staircase and the body regular
// (fluid unknowns with four whole links). Γ equals −∮ ∂ψ/∂n ds with n pointing away from the body,
// and the five-point flux sum over the staircase gives it as Γ = Σ (ψ_in − ψ_out). Because every
// node between two such staircases satisfies the five-point equation, the sum is the same on any
// of them: it is exact for the discrete solution, whatever staircase is chosen.
//
// Where no such staircase exists (a body within a few cells of a wall or another body), Γ is the
// integral of the surface velocity −∂ψ/∂n from the harmonic fits at the body's surface samples,
// accurate to second order but no longer exact.
type contour struct {
	Nodes []int32
	W     []float64
	Self  float64
	Exact bool // a staircase
}

// circulation returns Γ of the full field psi (indexed by node) with the body's constant c.
func (c contour) circulation(psi []float64, body float64) float64 {
	s := c.Self * body
	for q, k := range c.Nodes {
		s += c.W[q] * psi[k]
	}
	return s
}

// circulationOf returns Γ of superposition field j (see PsiSystem.fieldValue) of body b.
func (c contour) circulationOf(sys *PsiSystem, x []float64, j, b int) float64 {
	s := 0.0
	if j == b {
		s = c.Self
	}
	for q, k := range c.Nodes {
		s += c.W[q] * sys.fieldValue(x, j, int(k))
	}
	return s
}

// bodyContour returns the staircase around body b, or the surface integral where none exists.
func bodyContour(sys *PsiSystem, b int) (contour, error) {
	if c, ok := staircase(sys, b); ok {
		return c, nil
	}
	return surfaceContour(sys, b)
}

// surfaceContour builds Γ = Σ_i W_i·(−∇ψ·n)_i over the body's surface samples at spacing H, each
// gradient a harmonic-fit stencil (HarmonicStencil), collected into one weight per node.
func surfaceContour(sys *PsiSystem, b int) (contour, error) {
	m := sys.Mesh
	h := m.Grid.H
	weight := map[int32]float64{}
	var order []int32
	c := contour{}
	missed := 0.0
	pts := m.Geom.Bodies[b].Shape.Sample(h)
	for _, sp := range pts {
		st, ok := HarmonicStencil(m, sp.P, sp.P.Add(sp.N.Scale(1e-7*h)), true)
		if !ok {
			missed += sp.W
			continue
		}
		for q, k := range st.Nodes {
			if _, seen := weight[k]; !seen {
				order = append(order, k)
			}
			weight[k] -= sp.W * (st.GX[q]*sp.N.X + st.GY[q]*sp.N.Y)
		}
		c.Self -= sp.W * (st.CX*sp.N.X + st.CY*sp.N.Y)
	}
	total := 0.0
	for _, sp := range pts {
		total += sp.W
	}
	if missed > 0.05*total {
		return contour{}, fmt.Errorf("body %q: neither a ring of regular nodes nor enough fluid nodes at its surface to measure its circulation; refine the grid", m.Geom.Bodies[b].Name)
	}
	for _, k := range order {
		c.Nodes = append(c.Nodes, k)
		c.W = append(c.W, weight[k])
	}
	return c, nil
}

// staircase finds a staircase around body b: the body's nodes (solid, pinned, or with an arm to
// it) dilated by a margin of 2 nodes, else 1, 3 or 4, the first whose ring is regular.
func staircase(sys *PsiSystem, b int) (contour, bool) {
	m := sys.Mesh
	g := m.Grid
	id := mesh.BodyID(b)
	i0, i1, j0, j1 := g.NX, -1, g.NY, -1
	var core []int
	touch := func(k int) {
		core = append(core, k)
		i, j := k%g.NX, k/g.NX
		i0, i1, j0, j1 = min(i0, i), max(i1, i), min(j0, j), max(j1, j)
	}
	for k, o := range m.Owner {
		if int(o) == id && (m.Kind[k] == mesh.Solid || m.Kind[k] == mesh.Pinned) {
			touch(k)
		}
	}
	for _, c := range m.Cuts {
		for _, a := range c.Arms {
			if a.Boundary == id {
				touch(c.Node)
				break
			}
		}
	}
	if len(core) == 0 {
		return contour{}, false
	}
	regular := func(k int) bool {
		if k < 0 || k >= g.Len() || sys.Unknown[k] < 0 {
			return false
		}
		i := k % g.NX
		if i < 1 || i > g.NX-2 {
			return false
		}
		_, cut := m.Arms(k)
		return !cut
	}
	for _, margin := range [...]int{2, 1, 3, 4} {
		// A local window around the body, one node wider than the dilation on every side.
		w0, w1 := i0-margin-1, i1+margin+1
		v0, v1 := j0-margin-1, j1+margin+1
		if w0 < 0 || v0 < 0 || w1 >= g.NX || v1 >= g.NY {
			continue
		}
		wn := w1 - w0 + 1
		in := make([]bool, wn*(v1-v0+1))
		at := func(i, j int) int { return (j-v0)*wn + (i - w0) }
		for _, k := range core {
			i, j := k%g.NX, k/g.NX
			for dj := -margin; dj <= margin; dj++ {
				for di := -margin; di <= margin; di++ {
					in[at(i+di, j+dj)] = true
				}
			}
		}
		isCore := make([]bool, len(in))
		for _, k := range core {
			isCore[at(k%g.NX, k/g.NX)] = true
		}
		ok := true
		c := contour{Exact: true}
		for j := v0; j <= v1 && ok; j++ {
			for i := w0; i <= w1 && ok; i++ {
				if !in[at(i, j)] {
					continue
				}
				k := g.Index(i, j)
				if !isCore[at(i, j)] && !regular(k) {
					ok = false
					break
				}
				for _, d := range [4][2]int{{1, 0}, {-1, 0}, {0, 1}, {0, -1}} {
					ni, nj := i+d[0], j+d[1]
					if in[at(ni, nj)] {
						continue
					}
					nk := g.Index(ni, nj)
					if !regular(k) || !regular(nk) {
						ok = false
						break
					}
					c.Nodes = append(c.Nodes, int32(k), int32(nk))
					c.W = append(c.W, 1, -1)
				}
			}
		}
		if ok && len(c.Nodes) > 0 {
			return c, true
		}
	}
	return contour{}, false
}

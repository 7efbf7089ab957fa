package solver

import (
	"fmt"

	"phipsi/mesh"
)

// contour is a closed staircase of grid links around one body: each link joins a node inside the
// staircase (In) to one outside it (Out). Both ends of every link, and every node between the
// staircase and the body, are regular: fluid unknowns with four whole links.
//
// The circulation Γ = ∮ v·ds (counter-clockwise positive) equals −∮ ∂ψ/∂n ds with n pointing away
// from the body, and the five-point flux sum over the staircase gives it as
//
//	Γ = Σ (ψ_In − ψ_Out).
//
// Because every node between two such staircases satisfies the five-point equation, the sum is the
// same on any of them: it is a property of the discrete solution, not of the contour chosen.
type contour struct {
	In, Out []int32
}

// circulation returns Γ of the full field psi (indexed by node).
func (c contour) circulation(psi []float64) float64 {
	s := 0.0
	for q := range c.In {
		s += psi[c.In[q]] - psi[c.Out[q]]
	}
	return s
}

// circulationOf returns Γ of an unknown vector x of sys.
func (c contour) circulationOf(sys *PsiSystem, x []float64) float64 {
	s := 0.0
	for q := range c.In {
		s += x[sys.Unknown[c.In[q]]] - x[sys.Unknown[c.Out[q]]]
	}
	return s
}

// staircase finds a contour around body b: the body's nodes (solid, pinned, or with an arm to
// it) dilated by a margin of 2 nodes, else 1, 3 or 4, the first whose ring is regular.
func staircase(sys *PsiSystem, b int) (contour, error) {
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
		return contour{}, fmt.Errorf("body %q: no grid node lies inside or next to it; refine the grid", m.Geom.Bodies[b].Name)
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
		var c contour
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
					c.In = append(c.In, int32(k))
					c.Out = append(c.Out, int32(nk))
				}
			}
		}
		if ok && len(c.In) > 0 {
			return c, nil
		}
	}
	return contour{}, fmt.Errorf("body %q: no closed ring of regular fluid nodes around it (it is within a few cells of a wall, another body, the inlet or the outlet); move it or refine the grid", m.Geom.Bodies[b].Name)
}

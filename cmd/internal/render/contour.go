package render

import (
	"math"
	"sync"

	"phipsi/mesh"
)

// nodeField is a scalar at every node of a grid, ready for contouring.
type nodeField struct {
	g mesh.Grid
	v []float64
	// m and boundary, when set, make contouring aware of where grid links meet a boundary: on a
	// link with a cut arm the field runs linearly from the fluid node to the boundary's value at
	// the crossing (the exact position from the mesh), not to the value stored at the node
	// beyond. For ψ, which is constant on each boundary, that puts a contour at the true wall.
	m        *mesh.Mesh
	boundary func(id int) float64
	// maxJump, when > 0, skips cells whose corner values spread by more than this: a jump of a
	// many-valued potential across its branch cut, not a gradient.
	maxJump float64
}

// polyline is one joined contour line, in metres.
type polyline struct {
	pts    []mesh.Point
	closed bool
}

// contourLevel is every line of one level.
type contourLevel struct {
	value float64
	lines []polyline
}

// edge numbering: the link from node k east is edge 2k, the link from node k north is 2k + 1.

// crossing returns the point where the field crosses level c along edge e. The caller knows the
// end values lie on opposite sides of c.
func (f *nodeField) crossing(e int, c float64) mesh.Point {
	g := f.g
	a := e >> 1
	north := e&1 == 1
	b := a + 1
	fwd, back := mesh.East, mesh.West
	if north {
		b = a + g.NX
		fwd, back = mesh.North, mesh.South
	}
	va, vb := f.v[a], f.v[b]
	t := linearRoot(0, va, 1, vb, c)
	if f.m != nil {
		// Piecewise linear through the boundary crossings on the link: (0, va), (θa, ψ_B),
		// (1 − θb, ψ_B′), (1, vb), and the first crossing of c along it.
		var ts [4]float64
		var vs [4]float64
		n := 0
		ts[n], vs[n] = 0, va
		n++
		if f.m.IsFluid(a) {
			if arms, cut := f.m.Arms(a); cut && arms[fwd].Boundary != mesh.NoBoundary {
				ts[n], vs[n] = arms[fwd].Theta, f.boundary(arms[fwd].Boundary)
				n++
			}
		}
		if f.m.IsFluid(b) {
			if arms, cut := f.m.Arms(b); cut && arms[back].Boundary != mesh.NoBoundary {
				ts[n], vs[n] = 1-arms[back].Theta, f.boundary(arms[back].Boundary)
				n++
			}
		}
		ts[n], vs[n] = 1, vb
		n++
		for q := 1; q < n; q++ {
			if (vs[q-1] >= c) != (vs[q] >= c) {
				t = linearRoot(ts[q-1], vs[q-1], ts[q], vs[q], c)
				break
			}
		}
	}
	i, j := a%g.NX, a/g.NX
	p := g.At(i, j)
	if north {
		p.Y += t * g.H
	} else {
		p.X += t * g.H
	}
	return p
}

// linearRoot returns where the line through (t0, v0) and (t1, v1) takes the value c.
func linearRoot(t0, v0, t1, v1, c float64) float64 {
	if v1 == v0 {
		return 0.5 * (t0 + t1)
	}
	t := t0 + (t1-t0)*(c-v0)/(v1-v0)
	return math.Max(t0, math.Min(t1, t))
}

// contours traces every level of levels (ascending) by marching squares and joins the pieces
// into polylines. A node counts as above a level when its value is ≥ the level; the saddle of
// a cell with diagonally opposite corners above is resolved by the mean of the four corners.
func (f *nodeField) contours(levels []float64) []contourLevel {
	g := f.g
	nl := len(levels)
	segs := make([][]int32, nl) // per level: pairs of edge numbers, flattened
	if nl == 0 || g.NX < 2 || g.NY < 2 {
		return nil
	}
	v := f.v
	for j := 0; j < g.NY-1; j++ {
		row0 := v[j*g.NX : (j+1)*g.NX]
		row1 := v[(j+1)*g.NX : (j+2)*g.NX]
		for i := 0; i < g.NX-1; i++ {
			v00, v10, v11, v01 := row0[i], row0[i+1], row1[i+1], row1[i]
			// Plain comparisons (math.Min and Max spend time on NaN and signed zeros; a NaN
			// corner fails hi > lo below either way, as every comparison with NaN is false).
			lo, hi := v00, v00
			for _, w := range [3]float64{v10, v11, v01} {
				if w < lo || w != w {
					lo = w
				}
				if w > hi || w != w {
					hi = w
				}
			}
			if !(hi > lo) {
				continue
			}
			if f.maxJump > 0 && hi-lo > f.maxJump {
				continue
			}
			// First level > lo (a level equal to lo has every corner ≥ it: no crossing).
			q0, q1 := 0, nl
			for q0 < q1 {
				mid := (q0 + q1) / 2
				if levels[mid] > lo {
					q1 = mid
				} else {
					q0 = mid + 1
				}
			}
			k := j*g.NX + i
			eB := int32(2 * k)          // bottom: (i, j)–(i+1, j)
			eR := int32(2*(k+1) + 1)    // right: (i+1, j)–(i+1, j+1)
			eT := int32(2 * (k + g.NX)) // top: (i, j+1)–(i+1, j+1)
			eL := int32(2*k + 1)        // left: (i, j)–(i, j+1)
			for q := q0; q < nl && levels[q] <= hi; q++ {
				c := levels[q]
				b0, b1, b2, b3 := v00 >= c, v10 >= c, v11 >= c, v01 >= c
				var es [4]int32
				n := 0
				if b0 != b1 {
					es[n] = eB
					n++
				}
				if b1 != b2 {
					es[n] = eR
					n++
				}
				if b2 != b3 {
					es[n] = eT
					n++
				}
				if b3 != b0 {
					es[n] = eL
					n++
				}
				switch n {
				case 2:
					segs[q] = append(segs[q], es[0], es[1])
				case 4:
					if (0.25*(v00+v10+v11+v01) >= c) == b0 {
						// Corners 0 and 2 join through the centre: cut off corners 1 and 3.
						segs[q] = append(segs[q], eB, eR, eT, eL)
					} else {
						segs[q] = append(segs[q], eL, eB, eR, eT)
					}
				}
			}
		}
	}
	out := make([]contourLevel, nl)
	j := getJoiner(2 * g.Len())
	for q := range levels {
		out[q] = contourLevel{value: levels[q], lines: j.join(f, segs[q], levels[q])}
	}
	joiners.Put(j)
	return out
}

// joiners keeps joiners for reuse: their slot arrays span every edge of a grid (16 bytes per
// node), too much to allocate and clear for every contour pass.
var joiners sync.Pool

// getJoiner returns a joiner for at least edges edges, every slot empty.
func getJoiner(edges int) *joiner {
	if j, ok := joiners.Get().(*joiner); ok && len(j.first) >= edges {
		return j
	}
	return newJoiner(edges)
}

// joiner links segments that share an edge. Its slot arrays span every edge of the grid and are
// reset after each level by touching only the entries used, so a joiner comes back from join
// as empty as it went in.
type joiner struct {
	first, second []int32 // per edge: up to two segment numbers, −1 for none
	used          []bool
}

func newJoiner(edges int) *joiner {
	j := &joiner{first: make([]int32, edges), second: make([]int32, edges)}
	for i := range j.first {
		j.first[i] = -1
		j.second[i] = -1
	}
	return j
}

// join returns the polylines made of segs (pairs of edge numbers) at level c.
func (j *joiner) join(f *nodeField, segs []int32, c float64) []polyline {
	ns := len(segs) / 2
	if ns == 0 {
		return nil
	}
	for s := range ns {
		for _, e := range segs[2*s : 2*s+2] {
			if j.first[e] < 0 {
				j.first[e] = int32(s)
			} else {
				j.second[e] = int32(s)
			}
		}
	}
	if cap(j.used) < ns {
		j.used = make([]bool, ns)
	}
	used := j.used[:ns]
	clear(used)
	// other returns the segment across edge e from segment s, or −1.
	other := func(e, s int32) int32 {
		if j.first[e] == s {
			return j.second[e]
		}
		return j.first[e]
	}
	var lines []polyline
	var fwd, bwd []int32
	for s0 := range ns {
		if used[s0] {
			continue
		}
		used[s0] = true
		a, b := segs[2*s0], segs[2*s0+1]
		// Walk forward from b, then backward from a.
		fwd = append(fwd[:0], a, b)
		closed := false
		s, e := int32(s0), b
		for {
			n := other(e, s)
			if n < 0 || used[n] {
				closed = n == int32(s0)
				break
			}
			used[n] = true
			if segs[2*n] == e {
				e = segs[2*n+1]
			} else {
				e = segs[2*n]
			}
			s = n
			if e == a {
				closed = true
				break
			}
			fwd = append(fwd, e)
		}
		bwd = bwd[:0]
		if !closed {
			s, e = int32(s0), a
			for {
				n := other(e, s)
				if n < 0 || used[n] {
					break
				}
				used[n] = true
				if segs[2*n] == e {
					e = segs[2*n+1]
				} else {
					e = segs[2*n]
				}
				s = n
				bwd = append(bwd, e)
			}
		}
		pts := make([]mesh.Point, 0, len(fwd)+len(bwd)+1)
		for k := len(bwd) - 1; k >= 0; k-- {
			pts = append(pts, f.crossing(int(bwd[k]), c))
		}
		for _, e := range fwd {
			pts = append(pts, f.crossing(int(e), c))
		}
		if closed {
			pts = append(pts, pts[0])
		}
		lines = append(lines, polyline{pts: pts, closed: closed})
	}
	for _, e := range segs {
		j.first[e] = -1
		j.second[e] = -1
	}
	return lines
}

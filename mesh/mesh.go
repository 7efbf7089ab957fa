package mesh

import (
	"fmt"
	"math"
	"slices"

	"phipsi/internal/pages"
	"phipsi/internal/par"
)

// Kind classifies a node.
type Kind uint8

const (
	Outside Kind = iota // beyond a channel wall
	Solid               // inside a body
	Fluid               // an ordinary fluid node
	Pinned              // a fluid node on (within ThetaMin·H of) a boundary: it takes the boundary's value
)

// ThetaMin is the arm below which a fluid node is treated as lying on the boundary. Pinning moves
// the boundary by at most ThetaMin·H, far below the O(H²) error of the scheme, and keeps the
// matrix's diagonal bounded (Shortley–Weller coefficients grow like 1/θ).
const ThetaMin = 1e-6

// Directions of the four arms of a node.
const (
	East  = 0 // +x
	West  = 1 // −x
	North = 2 // +y
	South = 3 // −y
)

// Boundary identifiers: the walls, then the bodies.
const (
	LowerWall  = 0
	UpperWall  = 1
	NoBoundary = -1
)

// BodyID returns the boundary identifier of body k.
func BodyID(k int) int { return 2 + k }

// Arm is the distance from a node to the first boundary crossing along one grid link, as a
// fraction of H, and the boundary met. Theta is 1 and Boundary is NoBoundary for a whole link to a
// neighbouring node.
type Arm struct {
	Theta    float64
	Boundary int
}

// Body is a named closed obstacle.
type Body struct {
	Name  string
	Shape Shape
}

// Geometry is a channel from x = 0 to Length between two walls, with bodies in it.
type Geometry struct {
	Length       float64
	Lower, Upper *Wall
	Bodies       []Body
}

// Mesh is a grid classified against a geometry.
type Mesh struct {
	Grid
	Geom *Geometry
	Kind []Kind
	// Owner is the boundary a Solid, Outside or Pinned node belongs to, NoBoundary for Fluid.
	Owner []int16
	// Cuts lists the fluid nodes (Fluid or Pinned) with at least one arm shorter than a whole link
	// or ending on a boundary, in increasing node order.
	Cuts   []CutNode
	cutIdx []int32 // per node: index into Cuts, or −1
}

// CutNode is a node with the arms in its four directions.
type CutNode struct {
	Node int
	Arms [4]Arm
}

// IsFluid reports whether node k carries a fluid value (Fluid or Pinned).
func (m *Mesh) IsFluid(k int) bool { return m.Kind[k] == Fluid || m.Kind[k] == Pinned }

// Arms returns the four arms of node k and whether any of them is cut. An uncut node's arms are
// all whole links (at the inlet and outlet columns the missing neighbour is reported whole too;
// boundary conditions decide what it means).
func (m *Mesh) Arms(k int) ([4]Arm, bool) {
	if c := m.cutIdx[k]; c >= 0 {
		return m.Cuts[c].Arms, true
	}
	whole := Arm{1, NoBoundary}
	return [4]Arm{whole, whole, whole, whole}, false
}

// BoundaryName returns "lower", "upper" or the body's name.
func (m *Mesh) BoundaryName(id int) string {
	switch id {
	case LowerWall:
		return "lower"
	case UpperWall:
		return "upper"
	}
	return m.Geom.Bodies[id-2].Name
}

// NumBoundaries returns 2 + the number of bodies.
func (m *Mesh) NumBoundaries() int { return 2 + len(m.Geom.Bodies) }

// linkCut is what is known about one grid link: the first and last crossing from its start.
type linkCut struct {
	tmin, tmax float64
	bmin, bmax int
}

// Build classifies grid g against geometry geo.
func Build(geo *Geometry, g Grid) (*Mesh, error) {
	if geo.Lower == nil || geo.Upper == nil {
		return nil, fmt.Errorf("mesh: geometry needs both walls")
	}
	n := g.Len()
	m := &Mesh{Grid: g, Geom: geo, Kind: pages.Make[Kind](n), Owner: pages.Make[int16](n), cutIdx: pages.Make[int32](n)}
	m.classify()
	cuts := m.crossings()
	m.arms(cuts)
	return m, nil
}

// classify sets Kind and Owner from the walls and bodies.
func (m *Mesh) classify() {
	g := m.Grid
	// The walls' heights per column first, then the nodes row by row, in memory order.
	lowHi, upLo := make([]float64, g.NX), make([]float64, g.NX)
	for i := range g.NX {
		x := g.X(i)
		_, lowHi[i] = m.Geom.Lower.Range(x)
		upLo[i], _ = m.Geom.Upper.Range(x)
	}
	par.Rows(g.NY, meshRowsMin, func(_, j0, j1 int) {
		for j := j0; j < j1; j++ {
			y := g.Y(j)
			for i := 0; i < g.NX; i++ {
				k := g.Index(i, j)
				switch {
				case y <= lowHi[i]:
					m.Kind[k], m.Owner[k] = Outside, LowerWall
				case y >= upLo[i]:
					m.Kind[k], m.Owner[k] = Outside, UpperWall
				default:
					m.Kind[k], m.Owner[k] = Fluid, NoBoundary
				}
			}
		}
	})
	for b, body := range m.Geom.Bodies {
		i0, i1, j0, j1 := m.span(body.Shape.Bounds())
		for j := j0; j <= j1; j++ {
			for i := i0; i <= i1; i++ {
				k := g.Index(i, j)
				if m.Kind[k] == Fluid && body.Shape.Contains(g.At(i, j)) {
					m.Kind[k], m.Owner[k] = Solid, int16(BodyID(b))
				}
			}
		}
	}
}

// span returns the node index ranges covering box b (clamped to the grid).
func (m *Mesh) span(b Box) (i0, i1, j0, j1 int) {
	g := m.Grid
	i0 = max(0, int(math.Floor((b.Min.X-g.X0)/g.H)))
	i1 = min(g.NX-1, int(math.Ceil((b.Max.X-g.X0)/g.H)))
	j0 = max(0, int(math.Floor((b.Min.Y-g.Y0)/g.H)))
	j1 = min(g.NY-1, int(math.Ceil((b.Max.Y-g.Y0)/g.H)))
	return
}

// linkKey numbers the link from node k east (dir 0) or north (dir 1).
func linkKey(k, dir int) int64 { return int64(k)*2 + int64(dir) }

// crossings finds every place a grid line meets a boundary and files it under its link.
func (m *Mesh) crossings() map[int64]*linkCut {
	g := m.Grid
	cuts := make(map[int64]*linkCut)
	add := func(k, dir int, t float64, b int) {
		key := linkKey(k, dir)
		c := cuts[key]
		if c == nil {
			cuts[key] = &linkCut{t, t, b, b}
			return
		}
		if t < c.tmin {
			c.tmin, c.bmin = t, b
		}
		if t > c.tmax {
			c.tmax, c.bmax = t, b
		}
	}
	// onVertical files a crossing at height y on column i; onHorizontal at x on row j. A crossing
	// exactly at a node belongs to both links that meet there.
	onVertical := func(i int, y float64, b int) {
		f := (y - g.Y0) / g.H
		j := int(math.Floor(f))
		t := f - float64(j)
		if j >= 0 && j < g.NY-1 {
			add(g.Index(i, j), 1, t, b)
		}
		if t < 1e-12 && j-1 >= 0 && j-1 < g.NY-1 {
			add(g.Index(i, j-1), 1, 1, b)
		}
	}
	onHorizontal := func(j int, x float64, b int) {
		f := (x - g.X0) / g.H
		i := int(math.Floor(f))
		t := f - float64(i)
		if i >= 0 && i < g.NX-1 {
			add(g.Index(i, j), 0, t, b)
		}
		if t < 1e-12 && i-1 >= 0 && i-1 < g.NX-1 {
			add(g.Index(i-1, j), 0, 1, b)
		}
	}
	var buf []float64
	walls := [2]*Wall{m.Geom.Lower, m.Geom.Upper}
	for b, w := range walls {
		for i := 0; i < g.NX; i++ {
			buf = w.CrossVertical(buf[:0], g.X(i))
			for _, y := range buf {
				onVertical(i, y, b)
			}
		}
		lo, hi := w.Extent()
		for j := 0; j < g.NY; j++ {
			y := g.Y(j)
			if y < lo || y > hi {
				continue
			}
			buf = w.CrossHorizontal(buf[:0], y, g.X0, g.X(g.NX-1))
			for _, x := range buf {
				onHorizontal(j, x, b)
			}
		}
	}
	for bi, body := range m.Geom.Bodies {
		b := BodyID(bi)
		box := body.Shape.Bounds()
		i0, i1, j0, j1 := m.span(box)
		y0, y1 := box.Min.Y-g.H, box.Max.Y+g.H
		for i := i0; i <= i1; i++ {
			x := g.X(i)
			buf = body.Shape.Intersect(buf[:0], Point{x, y0}, Point{x, y1})
			for _, t := range buf {
				onVertical(i, y0+t*(y1-y0), b)
			}
		}
		x0, x1 := box.Min.X-g.H, box.Max.X+g.H
		for j := j0; j <= j1; j++ {
			y := g.Y(j)
			buf = body.Shape.Intersect(buf[:0], Point{x0, y}, Point{x1, y})
			for _, t := range buf {
				onHorizontal(j, x0+t*(x1-x0), b)
			}
		}
	}
	return cuts
}

// arms turns link crossings into per-node arms and pins nodes that lie on a boundary.
func (m *Mesh) arms(cuts map[int64]*linkCut) {
	g := m.Grid
	// Most links cross nothing: a bit per link tells which to look up in the map.
	crossed := make([]uint64, (2*g.Len()+63)/64)
	for key := range cuts {
		crossed[key>>6] |= 1 << (key & 63)
	}
	lookup := func(key int64) *linkCut {
		if crossed[key>>6]&(1<<(key&63)) == 0 {
			return nil
		}
		return cuts[key]
	}
	type nb struct{ di, dj, dir int }
	dirs := [4]nb{{1, 0, East}, {-1, 0, West}, {0, 1, North}, {0, -1, South}}
	// armsAt returns fluid node (i, j)'s arms and whether any meets a boundary.
	armsAt := func(i, j int) (arms [4]Arm, cut bool) {
		k := g.Index(i, j)
		for _, d := range dirs {
			arm := Arm{1, NoBoundary}
			ni, nj := i+d.di, j+d.dj
			if ni < 0 || ni >= g.NX || nj < 0 || nj >= g.NY {
				arms[d.dir] = arm
				continue
			}
			var c *linkCut
			forward := d.di+d.dj > 0
			if forward {
				c = lookup(linkKey(k, d.dj))
			} else {
				c = lookup(linkKey(g.Index(ni, nj), -d.dj))
			}
			if c != nil {
				if forward {
					arm = Arm{c.tmin, c.bmin}
				} else {
					arm = Arm{1 - c.tmax, c.bmax}
				}
			}
			nk := g.Index(ni, nj)
			if arm.Boundary == NoBoundary && (m.Kind[nk] == Solid || m.Kind[nk] == Outside) {
				// Round-off hid the crossing: the neighbour itself is on the boundary.
				arm = Arm{1, int(m.Owner[nk])}
			}
			if arm.Boundary != NoBoundary {
				cut = true
			}
			arms[d.dir] = arm
		}
		return arms, cut
	}
	// The rows are shared out in ranges; each range lists its cut nodes, and the lists are
	// joined in range order, which is node order.
	nx := g.NX
	found := make([][]CutNode, par.Ranges(g.NY, meshRowsMin))
	par.Rows(g.NY, meshRowsMin, func(r, j0, j1 int) {
		var list []CutNode
		for j := j0; j < j1; j++ {
			kind := m.Kind[j*nx : (j+1)*nx]
			idx := m.cutIdx[j*nx : (j+1)*nx]
			for i := range idx {
				idx[i] = -1
			}
			inner := armsFast && j > 0 && j < g.NY-1
			var south, north []Kind
			if inner {
				south, north = m.Kind[(j-1)*nx:j*nx], m.Kind[(j+1)*nx:(j+2)*nx]
			}
			for i, kd := range kind {
				if kd != Fluid {
					continue
				}
				k := j*nx + i
				if inner && i > 0 && i < nx-1 && kind[i-1] == Fluid && kind[i+1] == Fluid &&
					south[i] == Fluid && north[i] == Fluid && !crossedAround(crossed, k, nx) {
					continue // four whole arms: what armsAt finds for such a node
				}
				if arms, cut := armsAt(i, j); cut {
					list = append(list, CutNode{Node: k, Arms: arms})
				}
			}
		}
		found[r] = list
	})
	m.Cuts = slices.Concat(found...)
	for q, c := range m.Cuts {
		m.cutIdx[c.Node] = int32(q)
	}
	for _, c := range m.Cuts {
		best := -1
		for d, a := range c.Arms {
			if a.Boundary != NoBoundary && a.Theta < ThetaMin && (best < 0 || a.Theta < c.Arms[best].Theta) {
				best = d
			}
		}
		if best >= 0 {
			m.Kind[c.Node], m.Owner[c.Node] = Pinned, int16(c.Arms[best].Boundary)
		}
	}
}

// meshRowsMin is the number of grid rows from which Build shares them among goroutines.
const meshRowsMin = 64

// armsFast lets arms skip inner nodes whose four links cross nothing and whose neighbours are
// all fluid (tests turn it off to compare with the general loop).
var armsFast = true

// crossedAround reports whether any of the four links of inner node k, on rows of nx nodes, is
// marked in crossed (arms).
func crossedAround(crossed []uint64, k, nx int) bool {
	bit := func(key int64) bool { return crossed[key>>6]&(1<<(key&63)) != 0 }
	return bit(linkKey(k, 0)) || bit(linkKey(k, 1)) || bit(linkKey(k-1, 0)) || bit(linkKey(k-nx, 1))
}

// Hit is a crossing of a segment with a boundary.
type Hit struct {
	T        float64
	Boundary int
}

// Intersect appends to dst every crossing of the segment a→b with any boundary, sorted by T.
func (m *Mesh) Intersect(dst []Hit, a, b Point) []Hit {
	var buf [16]float64
	n0 := len(dst)
	for id, w := range [2]*Wall{m.Geom.Lower, m.Geom.Upper} {
		for _, t := range w.Intersect(buf[:0], a, b) {
			dst = append(dst, Hit{t, id})
		}
	}
	sb := segmentBox(a, b)
	for bi, body := range m.Geom.Bodies {
		if !sb.Overlaps(body.Shape.Bounds()) {
			continue
		}
		for _, t := range body.Shape.Intersect(buf[:0], a, b) {
			dst = append(dst, Hit{t, BodyID(bi)})
		}
	}
	slices.SortFunc(dst[n0:], func(p, q Hit) int {
		switch {
		case p.T < q.T:
			return -1
		case p.T > q.T:
			return 1
		}
		return p.Boundary - q.Boundary
	})
	return dst
}

// Visible reports whether the open segment a→b crosses no boundary, ignoring crossings within
// tol (as a fraction of the segment) of either end.
func (m *Mesh) Visible(a, b Point, tol float64) bool {
	var buf [8]Hit
	for _, h := range m.Intersect(buf[:0], a, b) {
		if h.T > tol && h.T < 1-tol {
			return false
		}
	}
	return true
}

// InFluid reports whether p lies strictly inside the channel and outside every body.
func (m *Mesh) InFluid(p Point) bool { return m.Geom.InFluid(p) }

// InFluid reports whether p lies strictly inside the channel and outside every body.
func (geo *Geometry) InFluid(p Point) bool {
	if p.X < 0 || p.X > geo.Length || !geo.Lower.Fluid(p) || !geo.Upper.Fluid(p) {
		return false
	}
	for _, b := range geo.Bodies {
		if b.Shape.Contains(p) {
			return false
		}
	}
	return true
}

// Sample returns the samples of boundary id at spacing ≤ ds with normals into the fluid.
func (m *Mesh) Sample(id int, ds float64) []SurfacePoint {
	switch id {
	case LowerWall:
		return m.Geom.Lower.Sample(ds)
	case UpperWall:
		return m.Geom.Upper.Sample(ds)
	}
	return m.Geom.Bodies[id-2].Shape.Sample(ds)
}

// Bounds returns the box of boundary id (walls: their x and y extents).
func (m *Mesh) Bounds(id int) Box {
	switch id {
	case LowerWall, UpperWall:
		w := m.Geom.Lower
		if id == UpperWall {
			w = m.Geom.Upper
		}
		lo, hi := w.Extent()
		return Box{Point{w.X0(), lo}, Point{w.X1(), hi}}
	}
	return m.Geom.Bodies[id-2].Shape.Bounds()
}

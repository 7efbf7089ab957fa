package mesh

import (
	"fmt"
	"math"
	"slices"

	"phipsi/internal/pages"
	"phipsi/internal/par"
)

// Faces describes the dual cells of a mesh, for finite-volume schemes whose unknowns live at the
// nodes.
//
// The dual cell of node (i, j) is the square of side H centred on it, [x_i − H/2, x_i + H/2] ×
// [y_j − H/2, y_j + H/2], cut to the grid's x range at the inlet and outlet columns (so the cells
// of the first and last columns are H/2 wide). Its faces are numbered:
//
//   - EastFace(k), the segment x = x_i + H/2, y_j − H/2 ≤ y ≤ y_j + H/2, between node k and its east
//     neighbour (i < NX − 1);
//   - NorthFace(k), the segment y = y_j + H/2, max(x_0, x_i − H/2) ≤ x ≤ min(x_{NX−1}, x_i + H/2),
//     between node k and its north neighbour (j < NY − 1); half as long in the first and last
//     columns;
//   - InletFace(j), the segment x = x_0, y_j − H/2 ≤ y ≤ y_j + H/2: the inlet side of the cell of
//     (0, j).
//
// The open part of a face is where it lies in the fluid. It is computed exactly: every grid line
// that carries faces is intersected with every boundary (analytic roots for ellipses and arcs,
// segment–line for polygons and straight wall pieces, bisection to round-off on cubic wall runs),
// and each stretch between consecutive crossings is classified by Geometry.InFluid at its midpoint.
// Stretches shorter than MinPart·H are dropped.
//
// The fluid in one dual cell may fall apart into several pieces, where a body thinner than a cell
// (a trailing edge, a vane) passes through it. Each piece is a separate control volume: the open
// parts of the cell's sides are grouped into pieces by joining any two whose midpoints see each
// other (the straight segment between them crosses no boundary), and the node itself, when it is
// in the fluid, joins the pieces it sees. The piece that holds a fluid node is its piece 0. A
// piece that touches nothing but the inlet side is dropped. Every open part of a face records the
// piece it belongs to in the cell on each side of it, so a scheme couples (node, piece) unknowns.
type Faces struct {
	Grid
	// state per face: faceClosed, faceOpen (the whole face open, piece 0 on both sides) or an
	// index into spans.
	state  []int32
	spans  []partSpan
	parts  []FacePart
	pieces []uint8
}

// FacePart is one open stretch of a face, from A to B (y for east and inlet faces, x for north
// faces; A < B), and the piece it belongs to in the cell on its low side (west or south; NoPiece
// for an inlet face) and on its high side (east or north).
type FacePart struct {
	A, B      float64
	Low, High uint8
}

// NoPiece marks the missing cell on the outer side of an inlet face (and a part that no piece
// kept).
const NoPiece = 255

// MinPart is the shortest open stretch of a face that is kept, as a fraction of H. Shorter
// stretches carry a flux of at most that fraction of one whole face's and would only make
// near-singular rows.
const MinPart = 1e-10

const (
	faceClosed = -1
	faceOpen   = -2
)

type partSpan struct{ start, n int32 }

// EastFace returns the number of node k's east face.
func (f *Faces) EastFace(k int) int { return 2 * k }

// NorthFace returns the number of node k's north face.
func (f *Faces) NorthFace(k int) int { return 2*k + 1 }

// InletFace returns the number of the inlet face of row j.
func (f *Faces) InletFace(j int) int { return 2*f.Len() + j }

// NumFaces returns the number of faces, inlet faces included.
func (f *Faces) NumFaces() int { return 2*f.Len() + f.NY }

// Segment returns the ends of face number face (the whole face, open or not), west or south
// end first.
func (f *Faces) Segment(face int) (a, b Point) {
	g := f.Grid
	h := g.H
	n := g.Len()
	if face >= 2*n {
		y := g.Y(face - 2*n)
		return Point{g.X0, y - h/2}, Point{g.X0, y + h/2}
	}
	k := face / 2
	i, j := k%g.NX, k/g.NX
	if face%2 == 0 {
		x := g.X(i) + h/2
		return Point{x, g.Y(j) - h/2}, Point{x, g.Y(j) + h/2}
	}
	y := g.Y(j) + h/2
	return Point{math.Max(g.X0, g.X(i)-h/2), y}, Point{math.Min(g.X(g.NX-1), g.X(i)+h/2), y}
}

// span returns the along-face coordinates of the ends of face number face: Segment's y (east
// and inlet faces) or x (north faces) coordinates, with the same bits.
func (f *Faces) span(face int) (lo, hi float64) {
	g := f.Grid
	n := g.Len()
	if face >= 2*n || face%2 == 0 {
		a, b := f.Segment(face)
		return a.Y, b.Y
	}
	k := face / 2
	i := k % g.NX
	if i == 0 || i == g.NX-1 {
		a, b := f.Segment(face)
		return a.X, b.X
	}
	// Inside the first and last columns the clamps of Segment do not bind.
	x := g.X(i)
	return x - g.H/2, x + g.H/2
}

// Parts appends the open parts of face number face to dst, in increasing A.
func (f *Faces) Parts(dst []FacePart, face int) []FacePart {
	switch s := f.state[face]; s {
	case faceClosed:
		return dst
	case faceOpen:
		lo, hi := f.span(face)
		low := uint8(0)
		if face >= 2*f.Len() {
			low = NoPiece
		}
		return append(dst, FacePart{A: lo, B: hi, Low: low, High: 0})
	default:
		sp := f.spans[s]
		return append(dst, f.parts[sp.start:sp.start+sp.n]...)
	}
}

// Whole reports whether face number face is open over its whole length, with piece 0 on both
// sides.
func (f *Faces) Whole(face int) bool { return f.state[face] == faceOpen }

// Fraction returns the length of part p of face number face over H. For a whole open face it is
// exactly 1 (1/2 for the north faces of the first and last columns), not the rounded difference
// of the part's end coordinates, so that uncut cells carry exact coefficients.
func (f *Faces) Fraction(face int, p FacePart) float64 {
	if f.state[face] == faceOpen {
		if face < 2*f.Len() && face%2 == 1 {
			if i := (face / 2) % f.NX; i == 0 || i == f.NX-1 {
				return 0.5
			}
		}
		return 1
	}
	return (p.B - p.A) / f.H
}

// Open returns the open length of face number face over H: 1 for a whole open face (1/2 for the
// north faces of the first and last columns), 0 for a closed one.
func (f *Faces) Open(face int) float64 {
	var buf [8]FacePart
	s := 0.0
	for _, p := range f.Parts(buf[:0], face) {
		s += p.B - p.A
	}
	return s / f.H
}

// Pieces returns the number of separate fluid pieces in node k's dual cell (0 when it holds no
// fluid). For a node in the fluid, piece 0 is the one that holds the node.
func (f *Faces) Pieces(k int) int { return int(f.pieces[k]) }

// NewFaces computes the open parts of every dual-cell face of m and the fluid pieces of every
// dual cell. It fails if fluid reaches beyond the grid's first or last row (the grid does not
// cover the channel) or a cell falls into more pieces than can be numbered.
func NewFaces(m *Mesh) (*Faces, error) {
	g := m.Grid
	n := g.Len()
	f := &Faces{Grid: g, state: pages.Make[int32](2*n + g.NY), pieces: pages.Make[uint8](n)}
	// The line loops below set every face but the east faces of the last column and the north
	// faces of the last row, which lie outside the grid.
	for j := range g.NY {
		f.state[f.EastFace(g.Index(g.NX-1, j))] = faceClosed
	}
	for i := range g.NX {
		f.state[f.NorthFace(g.Index(i, g.NY-1))] = faceClosed
	}
	h := g.H
	xa, xb := g.X0, g.X(g.NX-1)
	// Every grid line is cut on its own, the lines shared out in contiguous ranges; each range
	// keeps its parts apart, and the ranges' parts are joined in range order.
	// Vertical lines: east faces of column i at x_i + H/2, and the inlet line (i = −1), taken in
	// tiles of faceTile lines: the tile's lines are cut first, then its faces set row by row,
	// which writes the face states in memory order instead of one grid row apart.
	tile := faceTile
	if !facesFast {
		tile = 1
	}
	ntiles := (g.NX + tile - 1) / tile
	vertical := make([]faceSpans, par.Ranges(ntiles, max(1, faceLinesMin/tile)))
	par.Rows(ntiles, max(1, faceLinesMin/tile), func(r, t0, t1 int) {
		fs := &vertical[r]
		ylo, yhi := g.Y(0)-h/2, g.Y(g.NY-1)+h/2
		type line struct{ start, end, q int } // the line's intervals fs.tile[start:end], cursor q
		lines := make([]line, tile)
		for t := t0; t < t1; t++ {
			i0, i1 := t*tile-1, min((t+1)*tile, g.NX)-1 // lines i0 ≤ i < i1
			fs.tile = fs.tile[:0]
			for i := i0; i < i1; i++ {
				x := g.X0
				if i >= 0 {
					x = g.X(i) + h/2
				}
				fs.ivs, fs.buf = m.openIntervals(fs.ivs[:0], fs.buf[:0], true, x, ylo, yhi)
				lines[i-i0] = line{len(fs.tile), len(fs.tile) + len(fs.ivs), 0}
				fs.tile = append(fs.tile, fs.ivs...)
			}
			for j := range g.NY {
				lo, hi := g.Y(j)-h/2, g.Y(j)+h/2
				for i := i0; i < i1; i++ {
					ln := &lines[i-i0]
					face := f.InletFace(j)
					if i >= 0 {
						face = f.EastFace(g.Index(i, j))
					}
					ln.q = f.cutFace(fs, face, fs.tile[ln.start:ln.end], ln.q, lo, hi, i < 0)
				}
			}
		}
	})
	// Horizontal lines: north faces of row j at y_j + H/2 (j = −1 below the first row); the
	// lines below the first row and above the last must be dry.
	horizontal := make([]faceSpans, par.Ranges(g.NY+1, faceLinesMin))
	par.Rows(g.NY+1, faceLinesMin, func(r, lo, hi int) {
		fs := &horizontal[r]
		for j := lo - 1; j < hi-1; j++ {
			y := g.Y(0) - h/2
			if j >= 0 {
				y = g.Y(j) + h/2
			}
			fs.ivs, fs.buf = m.openIntervals(fs.ivs[:0], fs.buf[:0], false, y, xa, xb)
			if j < 0 || j == g.NY-1 {
				if len(fs.ivs) > 0 && fs.err == nil {
					fs.err = fmt.Errorf("mesh: fluid reaches y = %g at x = %g, beyond the grid's rows (the grid must cover the channel)", y, fs.ivs[0][0])
				}
				continue
			}
			q := 0
			for i := range g.NX {
				lo, hi := math.Max(xa, g.X(i)-h/2), math.Min(xb, g.X(i)+h/2)
				q = f.cutFace(fs, f.NorthFace(g.Index(i, j)), fs.ivs, q, lo, hi, false)
			}
		}
	})
	for _, fs := range slices.Concat(vertical, horizontal) {
		if fs.err != nil {
			return nil, fs.err
		}
		spanOff, partOff := int32(len(f.spans)), int32(len(f.parts))
		for _, sp := range fs.spans {
			f.spans = append(f.spans, partSpan{sp.start + partOff, sp.n})
		}
		f.parts = append(f.parts, fs.parts...)
		for _, face := range fs.faces {
			f.state[face] += spanOff
		}
	}
	if err := f.findPieces(m); err != nil {
		return nil, err
	}
	return f, nil
}

// faceSpans collects the parts of the faces of one range of grid lines, with the range's
// scratch space.
type faceSpans struct {
	spans   []partSpan
	parts   []FacePart
	faces   []int32 // the faces whose state indexes spans, in order
	err     error
	ivs     [][2]float64
	tile    [][2]float64 // the open intervals of a tile's lines, one after the other
	buf     []float64
	scratch []FacePart
}

// faceLinesMin is the number of grid lines from which NewFaces shares them among goroutines.
const faceLinesMin = 256

// faceTile is the number of vertical lines whose faces NewFaces sets together, row by row.
const faceTile = 64

// facesFast lets NewFaces take vertical lines in tiles and settle faces that lie wholly inside
// one open interval or between two without clipping (tests turn it off to compare with one line
// at a time and clipping everywhere).
var facesFast = true

// cutFace sets face number face, whose whole extent is [lo, hi], from the sorted disjoint open
// intervals ivs of its line, the first q of which end at or before lo, and returns the index of
// the first interval that may overlap a later, higher face. A face inside one interval is whole
// (an inlet face never is: its parts carry NoPiece), one that no interval overlaps is closed;
// the others are clipped.
func (f *Faces) cutFace(fs *faceSpans, face int, ivs [][2]float64, q int, lo, hi float64, inlet bool) int {
	if facesFast {
		for q < len(ivs) && ivs[q][1] <= lo {
			q++
		}
		switch {
		case q == len(ivs) || ivs[q][0] >= hi:
			f.state[face] = faceClosed
			return q
		case ivs[q][0] <= lo && ivs[q][1] >= hi && !inlet:
			f.state[face] = faceOpen
			return q
		}
	}
	var parts []FacePart
	parts, q = clipIntervals(fs.scratch[:0], ivs, q, lo, hi, f.H)
	fs.scratch = parts
	f.setFace(fs, face, parts, lo, hi, inlet)
	return q
}

// setFace stores the parts of one face whose whole extent is [lo, hi]: in its state when it is
// closed or whole, else in fs (its state then indexes fs.spans until the ranges are joined).
func (f *Faces) setFace(fs *faceSpans, face int, parts []FacePart, lo, hi float64, inlet bool) {
	switch {
	case len(parts) == 0:
		f.state[face] = faceClosed
		return
	case len(parts) == 1 && parts[0].A == lo && parts[0].B == hi && !inlet:
		f.state[face] = faceOpen
		return
	}
	for q := range parts {
		if inlet {
			parts[q].Low = NoPiece
		}
	}
	f.state[face] = int32(len(fs.spans))
	fs.faces = append(fs.faces, int32(face))
	fs.spans = append(fs.spans, partSpan{int32(len(fs.parts)), int32(len(parts))})
	fs.parts = append(fs.parts, parts...)
}

// clipIntervals appends to dst the parts of the sorted disjoint intervals ivs (from index q on)
// that overlap [lo, hi], dropping parts shorter than MinPart·h. It returns the index of the first
// interval that may overlap a later, higher face.
func clipIntervals(dst []FacePart, ivs [][2]float64, q int, lo, hi, h float64) ([]FacePart, int) {
	for q < len(ivs) && ivs[q][1] <= lo {
		q++
	}
	for r := q; r < len(ivs) && ivs[r][0] < hi; r++ {
		a, b := math.Max(lo, ivs[r][0]), math.Min(hi, ivs[r][1])
		if b-a >= MinPart*h {
			dst = append(dst, FacePart{A: a, B: b})
		}
	}
	return dst, q
}

// openIntervals appends to dst the maximal stretches of the axis-aligned segment — x = c,
// lo ≤ y ≤ hi when vertical, else y = c, lo ≤ x ≤ hi — that lie in the fluid, in increasing
// order. buf is scratch space for crossings; both are returned for reuse.
func (m *Mesh) openIntervals(dst [][2]float64, buf []float64, vertical bool, c, lo, hi float64) ([][2]float64, []float64) {
	geo := m.Geom
	h := m.Grid.H
	ts := buf[:0]
	for _, w := range [2]*Wall{geo.Lower, geo.Upper} {
		if vertical {
			ts = w.CrossVertical(ts, c)
		} else {
			ts = w.CrossHorizontal(ts, c, lo, hi)
		}
	}
	for _, body := range geo.Bodies {
		box := body.Shape.Bounds()
		var a, b Point
		if vertical {
			if c < box.Min.X || c > box.Max.X {
				continue
			}
			a, b = Point{c, box.Min.Y - h}, Point{c, box.Max.Y + h}
		} else {
			if c < box.Min.Y || c > box.Max.Y {
				continue
			}
			a, b = Point{box.Min.X - h, c}, Point{box.Max.X + h, c}
		}
		n0 := len(ts)
		ts = body.Shape.Intersect(ts, a, b)
		for q := n0; q < len(ts); q++ {
			if vertical {
				ts[q] = a.Y + ts[q]*(b.Y-a.Y)
			} else {
				ts[q] = a.X + ts[q]*(b.X-a.X)
			}
		}
	}
	// Keep the crossings inside (lo, hi), add the ends, sort and classify every stretch.
	w := 0
	for _, t := range ts {
		if t > lo && t < hi {
			ts[w] = t
			w++
		}
	}
	ts = append(ts[:w], lo, hi)
	slices.Sort(ts)
	at := func(s float64) Point {
		if vertical {
			return Point{c, s}
		}
		return Point{s, c}
	}
	for q := 0; q+1 < len(ts); q++ {
		a, b := ts[q], ts[q+1]
		if b <= a || !geo.InFluid(at(0.5*(a+b))) {
			continue
		}
		if n := len(dst); n > 0 && dst[n-1][1] == a {
			dst[n-1][1] = b
			continue
		}
		dst = append(dst, [2]float64{a, b})
	}
	return dst, ts
}

// cellSide is one side of a dual cell: a face and whether the cell lies on its high side.
type cellSide struct {
	face int
	high bool
}

// sides appends the faces around node (i, j)'s cell: west (or inlet), east, south, north.
func (f *Faces) sides(dst []cellSide, i, j int) []cellSide {
	g := f.Grid
	k := g.Index(i, j)
	if i == 0 {
		dst = append(dst, cellSide{f.InletFace(j), true})
	} else {
		dst = append(dst, cellSide{f.EastFace(k - 1), true})
	}
	if i < g.NX-1 {
		dst = append(dst, cellSide{f.EastFace(k), false})
	}
	if j > 0 {
		dst = append(dst, cellSide{f.NorthFace(k - g.NX), true})
	}
	if j < g.NY-1 {
		dst = append(dst, cellSide{f.NorthFace(k), false})
	}
	return dst
}

// findPieces groups the open parts around every cell into fluid pieces and records each part's
// piece on both of its sides.
func (f *Faces) findPieces(m *Mesh) error {
	g := f.Grid
	var sides []cellSide
	type member struct {
		side int // index into sides
		part int // index within the face's parts
		mid  Point
	}
	var mem []member
	var parent []int
	var tmp []FacePart
	var hits []Hit
	find := func(a int) int {
		for parent[a] != a {
			parent[a] = parent[parent[a]]
			a = parent[a]
		}
		return a
	}
	see := func(a, b Point) bool {
		hits = m.Intersect(hits[:0], a, b)
		for _, h := range hits {
			if h.T > 1e-12 && h.T < 1-1e-12 {
				return false
			}
		}
		return true
	}
	// The cells with every side whole (one piece) or none open (no piece) are found on all
	// goroutines; the others, which change the parts and may add spans, are then grouped in node
	// order on this one.
	mixed := make([][]int32, par.Ranges(g.NY, faceLinesMin))
	par.Rows(g.NY, faceLinesMin, func(r, j0, j1 int) {
		var sides []cellSide
		for j := j0; j < j1; j++ {
			for i := range g.NX {
				k := g.Index(i, j)
				var allOpen, anyOpen bool
				if facesFast && i > 0 && i < g.NX-1 && j > 0 && j < g.NY-1 {
					// The four sides of an inner cell, as sides lists them.
					w, e, s, n := f.state[2*k-2], f.state[2*k], f.state[2*(k-g.NX)+1], f.state[2*k+1]
					allOpen = w == faceOpen && e == faceOpen && s == faceOpen && n == faceOpen
					anyOpen = w != faceClosed || e != faceClosed || s != faceClosed || n != faceClosed
				} else {
					sides = f.sides(sides[:0], i, j)
					allOpen = j > 0 && j < g.NY-1
					for _, s := range sides {
						st := f.state[s.face]
						if st != faceOpen || s.face >= 2*g.Len() {
							allOpen = false
						}
						if st != faceClosed {
							anyOpen = true
						}
					}
				}
				switch {
				case allOpen:
					f.pieces[k] = 1
				case anyOpen:
					mixed[r] = append(mixed[r], int32(k))
				}
			}
		}
	})
	for _, kk := range slices.Concat(mixed...) {
		k := int(kk)
		i, j := k%g.NX, k/g.NX
		sides = f.sides(sides[:0], i, j)
		// Members: every open part of every side, then the node if it is in the fluid.
		mem = mem[:0]
		for si, s := range sides {
			tmp = f.Parts(tmp[:0], s.face)
			a, b := f.Segment(s.face)
			for pi, p := range tmp {
				mid := 0.5 * (p.A + p.B)
				pt := Point{a.X, mid}
				if a.Y == b.Y {
					pt = Point{mid, a.Y}
				}
				mem = append(mem, member{si, pi, pt})
			}
		}
		nParts := len(mem)
		node := -1
		if m.IsFluid(k) {
			node = len(mem)
			mem = append(mem, member{side: -1, mid: g.At(i, j)})
		}
		parent = parent[:0]
		for q := range mem {
			parent = append(parent, q)
		}
		for a := range mem {
			for b := a + 1; b < len(mem); b++ {
				ra, rb := find(a), find(b)
				if ra == rb || !see(mem[a].mid, mem[b].mid) {
					continue
				}
				parent[max(ra, rb)] = min(ra, rb)
			}
		}
		if node >= 0 && find(node) == node && nParts > 0 {
			// The node sees no part (a boundary curls around it): join the nearest.
			best := 0
			for q := 1; q < nParts; q++ {
				if mem[q].mid.Sub(mem[node].mid).Norm() < mem[best].mid.Sub(mem[node].mid).Norm() {
					best = q
				}
			}
			parent[find(best)] = node
		}
		// Number the groups: the node's first, then in order of first part; a group of inlet
		// parts alone gets no piece.
		label := make(map[int]int, 4)
		hasFace := make(map[int]bool, 4)
		for q := range nParts {
			if sides[mem[q].side].face < 2*g.Len() {
				hasFace[find(q)] = true
			}
		}
		if node >= 0 && hasFace[find(node)] {
			label[find(node)] = 0
		}
		for q := range nParts {
			r := find(q)
			if _, ok := label[r]; !ok && hasFace[r] {
				label[r] = len(label)
			}
		}
		if len(label) >= NoPiece {
			return fmt.Errorf("mesh: the dual cell of node (%d, %d) falls into %d pieces, more than %d", i, j, len(label), NoPiece-1)
		}
		f.pieces[k] = uint8(len(label))
		for q := range nParts {
			piece := NoPiece
			if l, ok := label[find(q)]; ok {
				piece = l
			}
			f.setPiece(sides[mem[q].side], mem[q].part, uint8(piece))
		}
	}
	return nil
}

// setPiece records piece as the piece of part number part of side s in the cell on s's side,
// turning a whole open face into an explicit one when the piece is not 0.
func (f *Faces) setPiece(s cellSide, part int, piece uint8) {
	st := f.state[s.face]
	if st == faceOpen {
		if piece == 0 {
			return
		}
		var one [1]FacePart
		p := f.Parts(one[:0], s.face)
		st = int32(len(f.spans))
		f.spans = append(f.spans, partSpan{int32(len(f.parts)), 1})
		f.parts = append(f.parts, p[0])
		f.state[s.face] = st
	}
	sp := f.spans[st]
	p := &f.parts[int(sp.start)+part]
	if s.high {
		p.High = piece
	} else {
		p.Low = piece
	}
}

package mesh

import (
	"fmt"
	"math"
)

// RoundedRect is a rectangle with circular-arc corners of radius R, rotated by Angle about its
// centre. A zero R is better built as a Polygon (see NewRectangle).
type RoundedRect struct {
	C      Point
	W, H   float64 // full width and height in the body's own frame, m
	R      float64 // corner radius, 0 < R ≤ min(W, H)/2
	Angle  float64 // radians CCW
	co, si float64
}

// NewRectangle returns a W×H rectangle centred on c and rotated by angle (radians), with corner
// radius r: a Polygon when r is 0, a RoundedRect otherwise.
func NewRectangle(c Point, w, h, angle, r float64) (Shape, error) {
	if !(w > 0 && h > 0) || r < 0 || r > math.Min(w, h)/2 {
		return nil, fmt.Errorf("rectangle %g×%g with corner radius %g is not possible", w, h, r)
	}
	co, si := math.Cos(angle), math.Sin(angle)
	if r == 0 {
		var pts []Point
		for _, q := range [4]Point{{-w / 2, -h / 2}, {w / 2, -h / 2}, {w / 2, h / 2}, {-w / 2, h / 2}} {
			pts = append(pts, q.Rotate(co, si).Add(c))
		}
		return NewPolygon(pts)
	}
	return &RoundedRect{C: c, W: w, H: h, R: r, Angle: angle, co: co, si: si}, nil
}

func (r *RoundedRect) local(p Point) Point { return p.Sub(r.C).Rotate(r.co, -r.si) }

// inner returns the half extents of the rectangle whose offset by R is the outline.
func (r *RoundedRect) inner() (float64, float64) { return r.W/2 - r.R, r.H/2 - r.R }

// Contains implements Shape with the signed distance of a rounded box.
func (r *RoundedRect) Contains(p Point) bool {
	q := r.local(p)
	ix, iy := r.inner()
	dx, dy := math.Abs(q.X)-ix, math.Abs(q.Y)-iy
	out := math.Hypot(math.Max(dx, 0), math.Max(dy, 0))
	in := math.Min(math.Max(dx, dy), 0)
	return out+in-r.R < 0
}

// Bounds implements Shape.
func (r *RoundedRect) Bounds() Box {
	b := Box{r.C, r.C}
	ix, iy := r.inner()
	for _, q := range [4]Point{{-ix, -iy}, {ix, -iy}, {ix, iy}, {-ix, iy}} {
		p := q.Rotate(r.co, r.si).Add(r.C)
		b.Min.X = math.Min(b.Min.X, p.X-r.R)
		b.Min.Y = math.Min(b.Min.Y, p.Y-r.R)
		b.Max.X = math.Max(b.Max.X, p.X+r.R)
		b.Max.Y = math.Max(b.Max.Y, p.Y+r.R)
	}
	return b
}

// Intersect implements Shape: four straight edges (segment–segment) and four quarter arcs (circle
// roots kept only in the arc's own quadrant).
func (r *RoundedRect) Intersect(dst []float64, a, b Point) []float64 {
	la, lb := r.local(a), r.local(b)
	ix, iy := r.inner()
	R := r.R
	edges := [4][2]Point{
		{{-ix, -iy - R}, {ix, -iy - R}},
		{{ix + R, -iy}, {ix + R, iy}},
		{{ix, iy + R}, {-ix, iy + R}},
		{{-ix - R, iy}, {-ix - R, -iy}},
	}
	for _, e := range edges {
		if e[0] == e[1] {
			continue
		}
		if t, ok := intersectSegments(la, lb, e[0], e[1]); ok {
			dst = append(dst, t)
		}
	}
	var roots [4]float64
	for _, c := range [4]Point{{ix, iy}, {-ix, iy}, {-ix, -iy}, {ix, -iy}} {
		ts := intersectCircle(roots[:0], la, lb, c, R)
		for _, t := range ts {
			p := la.Add(lb.Sub(la).Scale(t))
			d := p.Sub(c)
			if d.X*math.Copysign(1, c.X) >= -1e-12*R && d.Y*math.Copysign(1, c.Y) >= -1e-12*R {
				dst = append(dst, t)
			}
		}
	}
	return dst
}

// Sample implements Shape: counter-clockwise from the middle of the upstream (local −x) side,
// straight pieces at their midpoints and arcs at uniform angles.
func (r *RoundedRect) Sample(ds float64) []SurfacePoint {
	ix, iy := r.inner()
	R := r.R
	var out []SurfacePoint
	s := 0.0
	line := func(a, b Point) {
		d := b.Sub(a)
		l := d.Norm()
		if l == 0 {
			return
		}
		m := max(1, int(math.Ceil(l/ds)))
		t := d.Scale(1 / l)
		n := Point{t.Y, -t.X}
		w := l / float64(m)
		for q := range m {
			p := a.Add(d.Scale((float64(q) + 0.5) / float64(m)))
			out = append(out, SurfacePoint{S: s + w*(float64(q)+0.5), P: p, N: n, W: w})
		}
		s += l
	}
	arc := func(c Point, from float64) {
		l := R * math.Pi / 2
		m := max(2, int(math.Ceil(l/ds)))
		w := l / float64(m)
		for q := range m {
			a := from + (float64(q)+0.5)*math.Pi/2/float64(m)
			n := Point{math.Cos(a), math.Sin(a)}
			out = append(out, SurfacePoint{S: s + w*(float64(q)+0.5), P: c.Add(n.Scale(R)), N: n, W: w})
		}
		s += l
	}
	line(Point{-ix - R, 0}, Point{-ix - R, -iy})
	arc(Point{-ix, -iy}, math.Pi)
	line(Point{-ix, -iy - R}, Point{ix, -iy - R})
	arc(Point{ix, -iy}, 1.5*math.Pi)
	line(Point{ix + R, -iy}, Point{ix + R, iy})
	arc(Point{ix, iy}, 0)
	line(Point{ix, iy + R}, Point{-ix, iy + R})
	arc(Point{-ix, iy}, 0.5*math.Pi)
	line(Point{-ix - R, iy}, Point{-ix - R, 0})
	for k := range out {
		out[k].P = out[k].P.Rotate(r.co, r.si).Add(r.C)
		out[k].N = out[k].N.Rotate(r.co, r.si)
	}
	return out
}

// Corners implements Shape: the rounded outline has none.
func (r *RoundedRect) Corners() []Corner { return nil }

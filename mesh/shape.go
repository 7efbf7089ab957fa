package mesh

import (
	"fmt"
	"math"
)

// SurfacePoint is one sample of a boundary.
type SurfacePoint struct {
	S float64 // arc length from the first sample's segment start, m
	P Point   // position on the boundary
	N Point   // unit normal pointing into the fluid
	W float64 // arc length this sample stands for (quadrature weight), m
}

// Shape is a closed body outline.
type Shape interface {
	// Contains reports whether p lies strictly inside the body (to round-off).
	Contains(p Point) bool
	// Bounds returns a box that contains the whole body.
	Bounds() Box
	// Intersect appends to dst the parameters t in [0, 1] at which the segment a→b meets the outline.
	Intersect(dst []float64, a, b Point) []float64
	// Sample returns points on the outline, counter-clockwise from the most upstream point, spaced
	// by at most ds.
	Sample(ds float64) []SurfacePoint
	// Corners returns the outline's convex corners sharper than a smooth curve (polygons only):
	// position and interior angle in radians.
	Corners() []Corner
}

// Corner is a convex vertex of a polygonal outline.
type Corner struct {
	P     Point
	Angle float64 // interior angle, radians (0 for a cusp, π for a straight continuation)
	// Bisector is the unit vector from the corner into the fluid that halves the exterior angle.
	Bisector Point
	// In is the unit direction of the edge arriving at the corner and Out that of the edge
	// leaving it, in counter-clockwise order.
	In, Out Point
}

// Ellipse is an elliptic (or, with A == B, circular) body.
type Ellipse struct {
	C      Point   // centre
	A, B   float64 // semi-axes along the body's own x and y, m
	Angle  float64 // rotation of the body's x axis from the grid's x axis, radians CCW
	co, si float64
}

// NewEllipse returns an ellipse with centre c, semi-axes a and b and rotation angle (radians).
func NewEllipse(c Point, a, b, angle float64) *Ellipse {
	return &Ellipse{C: c, A: a, B: b, Angle: angle, co: math.Cos(angle), si: math.Sin(angle)}
}

// NewCircle returns a circle of radius r about c.
func NewCircle(c Point, r float64) *Ellipse { return NewEllipse(c, r, r, 0) }

// local maps p into the ellipse frame scaled so the outline is the unit circle.
func (e *Ellipse) local(p Point) Point {
	q := p.Sub(e.C).Rotate(e.co, -e.si)
	return Point{q.X / e.A, q.Y / e.B}
}

// Contains implements Shape.
func (e *Ellipse) Contains(p Point) bool {
	q := e.local(p)
	return q.X*q.X+q.Y*q.Y < 1
}

// Bounds implements Shape.
func (e *Ellipse) Bounds() Box {
	// Half extents of a rotated ellipse: √(a²cos² + b²sin²) and √(a²sin² + b²cos²).
	hx := math.Sqrt(e.A*e.A*e.co*e.co + e.B*e.B*e.si*e.si)
	hy := math.Sqrt(e.A*e.A*e.si*e.si + e.B*e.B*e.co*e.co)
	return Box{Point{e.C.X - hx, e.C.Y - hy}, Point{e.C.X + hx, e.C.Y + hy}}
}

// Intersect implements Shape. An affine map takes the ellipse to the unit circle and keeps the
// segment parameter t, so the crossing is the root of a quadratic.
func (e *Ellipse) Intersect(dst []float64, a, b Point) []float64 {
	return intersectCircle(dst, e.local(a), e.local(b), Point{}, 1)
}

// Sample implements Shape: uniform steps in the parametric angle, starting at the body's upstream
// end of its own x axis. The weights are the periodic trapezoidal rule, exact to round-off for the
// smooth periodic integrands of forces.
func (e *Ellipse) Sample(ds float64) []SurfacePoint {
	n := int(math.Ceil(2 * math.Pi * math.Max(e.A, e.B) / ds))
	if n < 16 {
		n = 16
	}
	dt := 2 * math.Pi / float64(n)
	pts := make([]SurfacePoint, n)
	s := 0.0
	for k := range n {
		t := math.Pi + float64(k)*dt
		c, sn := math.Cos(t), math.Sin(t)
		p := Point{e.A * c, e.B * sn}.Rotate(e.co, e.si).Add(e.C)
		nl := Point{c / e.A, sn / e.B}
		nl = nl.Scale(1/nl.Norm()).Rotate(e.co, e.si)
		speed := math.Hypot(e.A*sn, e.B*c) // |dP/dt|
		if k > 0 {
			s += 0.5 * (pts[k-1].W + speed*dt)
		}
		pts[k] = SurfacePoint{S: s, P: p, N: nl, W: speed * dt}
	}
	return pts
}

// Corners implements Shape: a smooth outline has none.
func (e *Ellipse) Corners() []Corner { return nil }

// Polygon is a closed polygonal body with vertices stored counter-clockwise.
type Polygon struct {
	Pts []Point
	box Box
}

// NewPolygon returns the polygon through pts (either orientation; a closing repeat of the first
// point and consecutive repeated points are dropped). It fails for fewer than three distinct
// points, zero area or a self-intersecting outline.
func NewPolygon(pts []Point) (*Polygon, error) {
	var clean []Point
	for _, p := range pts {
		if len(clean) > 0 && clean[len(clean)-1] == p {
			continue
		}
		clean = append(clean, p)
	}
	for len(clean) > 1 && clean[0] == clean[len(clean)-1] {
		clean = clean[:len(clean)-1]
	}
	if len(clean) < 3 {
		return nil, fmt.Errorf("polygon needs at least 3 distinct points, got %d", len(clean))
	}
	area := 0.0
	for i, p := range clean {
		area += p.Cross(clean[(i+1)%len(clean)])
	}
	if area == 0 || math.IsNaN(area) {
		return nil, fmt.Errorf("polygon has zero area")
	}
	if area < 0 {
		for i, j := 0, len(clean)-1; i < j; i, j = i+1, j-1 {
			clean[i], clean[j] = clean[j], clean[i]
		}
	}
	if i, j, ok := selfIntersection(clean); ok {
		return nil, fmt.Errorf("polygon edges %d and %d cross (self-intersecting outline)", i, j)
	}
	p := &Polygon{Pts: clean}
	p.box = Box{clean[0], clean[0]}
	for _, q := range clean {
		p.box.Min.X = math.Min(p.box.Min.X, q.X)
		p.box.Min.Y = math.Min(p.box.Min.Y, q.Y)
		p.box.Max.X = math.Max(p.box.Max.X, q.X)
		p.box.Max.Y = math.Max(p.box.Max.Y, q.Y)
	}
	return p, nil
}

// selfIntersection reports two non-adjacent edges that meet, or adjacent edges that fold back.
func selfIntersection(pts []Point) (int, int, bool) {
	n := len(pts)
	for i := range n {
		a, b := pts[i], pts[(i+1)%n]
		bi := segmentBox(a, b)
		for j := i + 1; j < n; j++ {
			c, d := pts[j], pts[(j+1)%n]
			adjacent := j == i+1 || (i == 0 && j == n-1)
			if adjacent {
				// Adjacent edges share a vertex; they overlap only if they fold back onto each other.
				u, v := b.Sub(a), d.Sub(c)
				if j != i+1 {
					u, v = a.Sub(b), c.Sub(d)
					u, v = v, u
				}
				if math.Abs(u.Cross(v)) <= 1e-14*u.Norm()*v.Norm() && u.Dot(v) < 0 {
					return i, j, true
				}
				continue
			}
			if !bi.Overlaps(segmentBox(c, d)) {
				continue
			}
			if _, ok := intersectSegments(a, b, c, d); ok {
				return i, j, true
			}
		}
	}
	return 0, 0, false
}

// Contains implements Shape by the crossing-number rule with half-open edges.
func (p *Polygon) Contains(q Point) bool {
	if q.X < p.box.Min.X || q.X > p.box.Max.X || q.Y < p.box.Min.Y || q.Y > p.box.Max.Y {
		return false
	}
	in := false
	n := len(p.Pts)
	for i := range n {
		a, b := p.Pts[i], p.Pts[(i+1)%n]
		if (a.Y > q.Y) != (b.Y > q.Y) {
			x := a.X + (q.Y-a.Y)*(b.X-a.X)/(b.Y-a.Y)
			if q.X < x {
				in = !in
			}
		}
	}
	return in
}

// Bounds implements Shape.
func (p *Polygon) Bounds() Box { return p.box }

// Intersect implements Shape.
func (p *Polygon) Intersect(dst []float64, a, b Point) []float64 {
	sb := segmentBox(a, b)
	if !sb.Overlaps(p.box) {
		return dst
	}
	n := len(p.Pts)
	for i := range n {
		c, d := p.Pts[i], p.Pts[(i+1)%n]
		if !sb.Overlaps(segmentBox(c, d)) {
			continue
		}
		if t, ok := intersectSegments(a, b, c, d); ok {
			dst = append(dst, t)
		}
	}
	return dst
}

// start returns the index of the most upstream vertex (smallest x, then smallest y).
func (p *Polygon) start() int {
	k := 0
	for i, q := range p.Pts {
		if q.X < p.Pts[k].X || (q.X == p.Pts[k].X && q.Y < p.Pts[k].Y) {
			k = i
		}
	}
	return k
}

// Sample implements Shape: each edge is cut into equal pieces no longer than ds and sampled at the
// pieces' midpoints (never at a corner, where the normal is undefined); the weight is the piece
// length, so sums of weights are exact edge integrals of piecewise-constant data.
func (p *Polygon) Sample(ds float64) []SurfacePoint {
	n := len(p.Pts)
	k0 := p.start()
	var out []SurfacePoint
	s := 0.0
	for e := range n {
		a, b := p.Pts[(k0+e)%n], p.Pts[(k0+e+1)%n]
		d := b.Sub(a)
		l := d.Norm()
		m := int(math.Ceil(l / ds))
		if m < 1 {
			m = 1
		}
		t := d.Scale(1 / l)
		nrm := Point{t.Y, -t.X} // outward for a counter-clockwise outline
		w := l / float64(m)
		for q := range m {
			f := (float64(q) + 0.5) / float64(m)
			out = append(out, SurfacePoint{S: s + w*(float64(q)+0.5), P: a.Add(d.Scale(f)), N: nrm, W: w})
		}
		s += l
	}
	return out
}

// Corners implements Shape: every convex vertex, with its interior angle.
func (p *Polygon) Corners() []Corner {
	n := len(p.Pts)
	var out []Corner
	for i := range n {
		prev, cur, next := p.Pts[(i+n-1)%n], p.Pts[i], p.Pts[(i+1)%n]
		in := cur.Sub(prev)
		out2 := next.Sub(cur)
		in = in.Scale(1 / in.Norm())
		out2 = out2.Scale(1 / out2.Norm())
		turn := math.Atan2(in.Cross(out2), in.Dot(out2)) // > 0: convex for a CCW outline
		if turn <= 0 {
			continue
		}
		angle := math.Pi - turn
		// The corner's outward bisector halves the exterior angle: the sum of the two outward
		// edge normals, or the arriving direction itself at a cusp.
		bis := Point{in.Y, -in.X}.Add(Point{out2.Y, -out2.X})
		if bis.Norm() < 1e-12 {
			bis = in
		}
		bis = bis.Scale(1 / bis.Norm())
		out = append(out, Corner{P: cur, Angle: angle, Bisector: bis, In: in, Out: out2})
	}
	return out
}

package mesh

import "math"

// Point is a position or a vector in the plane, in metres.
type Point struct{ X, Y float64 }

// Add returns p + q.
func (p Point) Add(q Point) Point { return Point{p.X + q.X, p.Y + q.Y} }

// Sub returns p − q.
func (p Point) Sub(q Point) Point { return Point{p.X - q.X, p.Y - q.Y} }

// Scale returns s·p.
func (p Point) Scale(s float64) Point { return Point{s * p.X, s * p.Y} }

// Dot returns p·q.
func (p Point) Dot(q Point) float64 { return p.X*q.X + p.Y*q.Y }

// Cross returns the z component of p × q.
func (p Point) Cross(q Point) float64 { return p.X*q.Y - p.Y*q.X }

// Norm returns |p|.
func (p Point) Norm() float64 { return math.Hypot(p.X, p.Y) }

// Rotate returns p turned counter-clockwise by the angle whose cosine and sine are c and s.
func (p Point) Rotate(c, s float64) Point { return Point{c*p.X - s*p.Y, s*p.X + c*p.Y} }

// Box is an axis-aligned rectangle.
type Box struct{ Min, Max Point }

// Overlaps reports whether b and c share any point.
func (b Box) Overlaps(c Box) bool {
	return b.Min.X <= c.Max.X && c.Min.X <= b.Max.X && b.Min.Y <= c.Max.Y && c.Min.Y <= b.Max.Y
}

// Grow returns b enlarged by d on every side.
func (b Box) Grow(d float64) Box {
	return Box{Point{b.Min.X - d, b.Min.Y - d}, Point{b.Max.X + d, b.Max.Y + d}}
}

// segmentBox returns the bounding box of the segment a–b.
func segmentBox(a, b Point) Box {
	return Box{Point{math.Min(a.X, b.X), math.Min(a.Y, b.Y)}, Point{math.Max(a.X, b.X), math.Max(a.Y, b.Y)}}
}

// intersectSegments returns the parameter t along a→b where it meets the segment c→d, and whether
// they meet (end points included, to round-off). Collinear overlaps report no crossing: a link that
// runs along a boundary segment is classified by its end nodes instead.
func intersectSegments(a, b, c, d Point) (float64, bool) {
	r := b.Sub(a)
	s := d.Sub(c)
	den := r.Cross(s)
	if den == 0 {
		return 0, false
	}
	ca := c.Sub(a)
	t := ca.Cross(s) / den
	u := ca.Cross(r) / den
	const eps = 1e-12
	if t < -eps || t > 1+eps || u < -eps || u > 1+eps {
		return 0, false
	}
	return clamp01(t), true
}

// intersectCircle appends to dst the parameters t in [0, 1] where a→b meets the circle |p − c| = r.
func intersectCircle(dst []float64, a, b, c Point, r float64) []float64 {
	d := b.Sub(a)
	f := a.Sub(c)
	// |f + t d|² = r²  →  (d·d) t² + 2 (f·d) t + (f·f − r²) = 0.
	A := d.Dot(d)
	B := f.Dot(d)
	C := f.Dot(f) - r*r
	return appendQuadraticRoots(dst, A, B, C)
}

// appendQuadraticRoots appends the roots in [0, 1] of A t² + 2B t + C = 0, computed without
// cancellation (the larger root first from the sign-stable form, the other from the product).
func appendQuadraticRoots(dst []float64, A, B, C float64) []float64 {
	if A == 0 {
		return dst
	}
	disc := B*B - A*C
	if disc < 0 {
		return dst
	}
	sq := math.Sqrt(disc)
	q := -B - math.Copysign(sq, B)
	var t1, t2 float64
	if q == 0 {
		t1, t2 = 0, 0
	} else {
		t1 = q / A
		t2 = C / q
	}
	const eps = 1e-12
	for _, t := range [2]float64{t1, t2} {
		if t >= -eps && t <= 1+eps {
			dst = append(dst, clamp01(t))
		}
	}
	return dst
}

func clamp01(t float64) float64 {
	if t < 0 {
		return 0
	}
	if t > 1 {
		return 1
	}
	return t
}

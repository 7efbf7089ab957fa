package mesh

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/interp"
)

// Wall is a channel wall y(x): runs of strictly increasing x, each straight (piecewise linear) or
// smooth (Fritsch–Butland monotone cubic, which never overshoots a stepped profile), joined by
// vertical steps where an x repeats. The fluid lies above a lower wall and below an upper one.
type Wall struct {
	Upper bool // fluid below the wall
	runs  []wallRun
}

type wallRun struct {
	x, y []float64
	fb   *interp.FritschButland // nil: piecewise linear
}

// NewWall returns the wall through pts (x non-decreasing, at most two points per x).
func NewWall(pts []Point, smooth, upper bool) (*Wall, error) {
	if len(pts) < 2 {
		return nil, fmt.Errorf("wall needs at least 2 points, got %d", len(pts))
	}
	w := &Wall{Upper: upper}
	cur := wallRun{}
	flush := func() error {
		if len(cur.x) < 2 {
			return fmt.Errorf("wall step at x = %g must be followed and preceded by a run of at least 2 points", cur.x[0])
		}
		if smooth && len(cur.x) > 2 {
			fb := new(interp.FritschButland)
			if err := fb.Fit(cur.x, cur.y); err != nil {
				return fmt.Errorf("wall profile: %w", err)
			}
			cur.fb = fb
		}
		w.runs = append(w.runs, cur)
		return nil
	}
	for i, p := range pts {
		if math.IsNaN(p.X) || math.IsNaN(p.Y) || math.IsInf(p.X, 0) || math.IsInf(p.Y, 0) {
			return nil, fmt.Errorf("wall point %d is not finite", i)
		}
		if i > 0 {
			prev := pts[i-1]
			switch {
			case p.X < prev.X:
				return nil, fmt.Errorf("wall x must not decrease: point %d has x = %g after %g", i, p.X, prev.X)
			case p.X == prev.X:
				if i >= 2 && pts[i-2].X == p.X {
					return nil, fmt.Errorf("wall has more than two points at x = %g", p.X)
				}
				if i == 1 || i == len(pts)-1 {
					// A step at either end: the run before (or after) it is a single point.
					return nil, fmt.Errorf("wall step at x = %g needs a run of at least 2 points on both sides", p.X)
				}
				if err := flush(); err != nil {
					return nil, err
				}
				cur = wallRun{}
			}
		}
		cur.x = append(cur.x, p.X)
		cur.y = append(cur.y, p.Y)
	}
	if err := flush(); err != nil {
		return nil, err
	}
	return w, nil
}

// X0 and X1 return the wall's x extent.
func (w *Wall) X0() float64 { return w.runs[0].x[0] }

// X1 returns the x where the wall ends.
func (w *Wall) X1() float64 { r := w.runs[len(w.runs)-1]; return r.x[len(r.x)-1] }

// eval returns y and dy/dx of run r at x (x inside the run).
func (r *wallRun) eval(x float64) (float64, float64) {
	if r.fb != nil {
		return r.fb.Predict(x), r.fb.PredictDerivative(x)
	}
	k := r.interval(x)
	x0, x1, y0, y1 := r.x[k], r.x[k+1], r.y[k], r.y[k+1]
	s := (y1 - y0) / (x1 - x0)
	return y0 + s*(x-x0), s
}

// interval returns k with x[k] ≤ x ≤ x[k+1] (clamped to the run).
func (r *wallRun) interval(x float64) int {
	lo, hi := 0, len(r.x)-1
	for hi-lo > 1 {
		mid := (lo + hi) / 2
		if r.x[mid] <= x {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}

func (r *wallRun) covers(x float64) bool { return x >= r.x[0] && x <= r.x[len(r.x)-1] }

// Range returns the lowest and highest wall y at x: equal except at a step, where the wall is
// the vertical face between the two. x outside the wall is clamped to its ends.
func (w *Wall) Range(x float64) (lo, hi float64) {
	x = math.Max(w.X0(), math.Min(w.X1(), x))
	lo, hi = math.Inf(1), math.Inf(-1)
	for i := range w.runs {
		r := &w.runs[i]
		if r.covers(x) {
			y, _ := r.eval(x)
			lo, hi = math.Min(lo, y), math.Max(hi, y)
		}
	}
	return lo, hi
}

// Y returns the wall height at x on the downstream side of any step there.
func (w *Wall) Y(x float64) float64 {
	x = math.Max(w.X0(), math.Min(w.X1(), x))
	for i := len(w.runs) - 1; i >= 0; i-- {
		if w.runs[i].covers(x) {
			y, _ := w.runs[i].eval(x)
			return y
		}
	}
	panic("mesh: wall does not cover x") // unreachable after the clamp
}

// Extent returns the lowest and highest y of the whole wall (monotone pieces take their extremes
// at knots).
func (w *Wall) Extent() (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	for _, r := range w.runs {
		for _, y := range r.y {
			lo, hi = math.Min(lo, y), math.Max(hi, y)
		}
	}
	return lo, hi
}

// Fluid reports whether p is on the fluid side of the wall (strictly).
func (w *Wall) Fluid(p Point) bool {
	lo, hi := w.Range(p.X)
	if w.Upper {
		return p.Y < lo
	}
	return p.Y > hi
}

// CrossVertical appends the wall heights on the line x = c (two at a step).
func (w *Wall) CrossVertical(dst []float64, c float64) []float64 {
	for i := range w.runs {
		if w.runs[i].covers(c) {
			y, _ := w.runs[i].eval(c)
			dst = append(dst, y)
		}
	}
	return dst
}

// CrossHorizontal appends the x in [xa, xb] where the wall meets the line y = c: one root per knot
// interval at most (each piece is monotone), found by bisection to round-off, plus step faces.
func (w *Wall) CrossHorizontal(dst []float64, c, xa, xb float64) []float64 {
	for ri := range w.runs {
		r := &w.runs[ri]
		if r.x[len(r.x)-1] < xa || r.x[0] > xb {
			continue
		}
		k0 := r.interval(math.Max(xa, r.x[0]))
		for k := k0; k < len(r.x)-1 && r.x[k] <= xb; k++ {
			lo, hi := math.Max(xa, r.x[k]), math.Min(xb, r.x[k+1])
			if lo > hi {
				continue
			}
			if x, ok := r.root(c, lo, hi); ok {
				dst = append(dst, x)
			}
		}
		if ri+1 < len(w.runs) {
			xs := r.x[len(r.x)-1]
			y1, y2 := r.y[len(r.y)-1], w.runs[ri+1].y[0]
			if xs >= xa && xs <= xb && c >= math.Min(y1, y2) && c <= math.Max(y1, y2) {
				dst = append(dst, xs)
			}
		}
	}
	return dst
}

// root finds x in [lo, hi] with y(x) = c on a monotone piece.
func (r *wallRun) root(c, lo, hi float64) (float64, bool) {
	flo, _ := r.eval(lo)
	fhi, _ := r.eval(hi)
	flo -= c
	fhi -= c
	switch {
	case flo == 0 && fhi == 0:
		return 0, false // the line runs along a flat piece: no crossing
	case flo == 0:
		return lo, true
	case fhi == 0:
		return hi, true
	case (flo > 0) == (fhi > 0):
		return 0, false
	}
	if r.fb == nil {
		return lo + (hi-lo)*flo/(flo-fhi), true
	}
	for range 200 {
		mid := 0.5 * (lo + hi)
		if mid <= lo || mid >= hi {
			break
		}
		fm, _ := r.eval(mid)
		fm -= c
		if (fm > 0) == (flo > 0) {
			lo, flo = mid, fm
		} else {
			hi = mid
		}
	}
	return 0.5 * (lo + hi), true
}

// Intersect appends the parameters t in [0, 1] where the segment a→b meets the wall.
func (w *Wall) Intersect(dst []float64, a, b Point) []float64 {
	if a.X == b.X {
		var ys [2]float64
		for _, y := range w.CrossVertical(ys[:0], a.X) {
			if t := (y - a.Y) / (b.Y - a.Y); t >= 0 && t <= 1 {
				dst = append(dst, t)
			}
		}
		// A step face at this x is collinear with the segment: classified by end points instead.
		return dst
	}
	xa, xb := math.Min(a.X, b.X), math.Max(a.X, b.X)
	seg := func(x float64) float64 { return a.Y + (b.Y-a.Y)*(x-a.X)/(b.X-a.X) }
	for ri := range w.runs {
		r := &w.runs[ri]
		if r.x[len(r.x)-1] < xa || r.x[0] > xb {
			continue
		}
		// g(x) = wall − segment; on each knot interval split into 8 pieces and bisect sign changes.
		k0 := r.interval(math.Max(xa, r.x[0]))
		for k := k0; k < len(r.x)-1 && r.x[k] <= xb; k++ {
			lo, hi := math.Max(xa, r.x[k]), math.Min(xb, r.x[k+1])
			if lo > hi {
				continue
			}
			const pieces = 8
			g := func(x float64) float64 { y, _ := r.eval(x); return y - seg(x) }
			x0, g0 := lo, g(lo)
			for q := 1; q <= pieces; q++ {
				x1 := lo + (hi-lo)*float64(q)/pieces
				g1 := g(x1)
				if g0 == 0 || (g0 > 0) != (g1 > 0) || g1 == 0 {
					p0, p1, f0 := x0, x1, g0
					if g0 != 0 && g1 != 0 {
						for range 100 {
							m := 0.5 * (p0 + p1)
							fm := g(m)
							if (fm > 0) == (f0 > 0) {
								p0, f0 = m, fm
							} else {
								p1 = m
							}
						}
					} else if g1 == 0 {
						p0, p1 = x1, x1
					} else {
						p1 = p0
					}
					x := 0.5 * (p0 + p1)
					dst = append(dst, clamp01((x-a.X)/(b.X-a.X)))
				}
				x0, g0 = x1, g1
			}
		}
		if ri+1 < len(w.runs) {
			xs := r.x[len(r.x)-1]
			if t, ok := intersectSegments(a, b, Point{xs, r.y[len(r.y)-1]}, Point{xs, w.runs[ri+1].y[0]}); ok {
				dst = append(dst, t)
			}
		}
	}
	return dst
}

// Sample returns points along the wall in x order (step faces included), spaced by at most ds in
// arc length, each with the unit normal into the fluid.
func (w *Wall) Sample(ds float64) []SurfacePoint {
	return w.SampleBetween(math.Inf(-1), math.Inf(1), ds)
}

// SampleBetween returns the points of Sample(ds) with xa ≤ x ≤ xb, and a few beyond each end,
// with the same arc lengths S.
func (w *Wall) SampleBetween(xa, xb, ds float64) []SurfacePoint {
	// Room for about one point per ds of the range (more where the wall slopes or steps): the
	// walls of a fine grid carry hundreds of thousands of samples.
	est := 16 * len(w.runs)
	if n := len(w.runs); n > 0 && ds > 0 {
		last := w.runs[n-1].x
		if lo, hi := math.Max(xa, w.runs[0].x[0]), math.Min(xb, last[len(last)-1]); hi > lo {
			est += int(math.Min(1<<26, 1.1*(hi-lo)/ds))
		}
	}
	out := make([]SurfacePoint, 0, est)
	s := 0.0
	side := 1.0 // lower wall: normal (−y′, 1)/…; upper wall: the opposite
	if w.Upper {
		side = -1
	}
	for ri := range w.runs {
		r := &w.runs[ri]
		for k := 0; k < len(r.x)-1; k++ {
			x0, x1 := r.x[k], r.x[k+1]
			// Arc length of the piece by a fine chord sum (exact for straight pieces).
			const fine = 32
			length := 0.0
			prevY, _ := r.eval(x0)
			for q := 1; q <= fine; q++ {
				x := x0 + (x1-x0)*float64(q)/fine
				y, _ := r.eval(x)
				length += math.Hypot(x1-x0, (y-prevY)*fine) / fine
				prevY = y
			}
			m := max(1, int(math.Ceil(length/ds)))
			wgt := length / float64(m)
			// The points q of the piece with x in [xa, xb], one more on each side (x rises with
			// q); a piece outside the range gives none, but its length still counts in S.
			qa, qb := 0, m
			if x1 > x0 {
				fm := float64(m)
				qa = int(math.Max(0, math.Floor((xa-x0)/(x1-x0)*fm-0.5)-1))
				qb = int(math.Min(fm, math.Ceil((xb-x0)/(x1-x0)*fm-0.5)+2))
			} else if x0 < xa || x0 > xb {
				qb = 0
			}
			for q := qa; q < qb; q++ {
				x := x0 + (x1-x0)*(float64(q)+0.5)/float64(m)
				y, dy := r.eval(x)
				n := Point{-dy, 1}.Scale(side / math.Hypot(1, dy))
				out = append(out, SurfacePoint{S: s + wgt*(float64(q)+0.5), P: Point{x, y}, N: n, W: wgt})
			}
			s += length
		}
		if ri+1 < len(w.runs) {
			xs := r.x[len(r.x)-1]
			y1, y2 := r.y[len(r.y)-1], w.runs[ri+1].y[0]
			l := math.Abs(y2 - y1)
			m := max(1, int(math.Ceil(l/ds)))
			if xs < xa || xs > xb {
				m = 0
			}
			// Lower wall: a rise faces upstream (−x); upper wall: a drop faces upstream.
			n := Point{-side * math.Copysign(1, y2-y1), 0}
			wgt := l / math.Max(1, float64(m))
			for q := range m {
				y := y1 + (y2-y1)*(float64(q)+0.5)/float64(m)
				out = append(out, SurfacePoint{S: s + wgt*(float64(q)+0.5), P: Point{xs, y}, N: n, W: wgt})
			}
			s += l
		}
	}
	return out
}

package flow

import (
	"math"

	"phipsi/mesh"
)

// Extreme is a located extreme value of a surface distribution.
type Extreme struct {
	Value float64
	At    mesh.Point
	S     float64 // arc length of the extreme
}

// extreme returns the largest (sign +1) or smallest (sign −1) of the values val(i) over pts,
// refined between samples by the parabola through the best sample and its neighbours (closed
// says the sequence wraps around). The refinement removes the error of the samples missing the
// true peak, which at spacing H is of the same order as the scheme's own error.
func extreme(pts []SurfaceValue, closed bool, sign float64, val func(*SurfaceValue) float64) Extreme {
	best := 0
	for i := range pts {
		if sign*val(&pts[i]) > sign*val(&pts[best]) {
			best = i
		}
	}
	n := len(pts)
	e := Extreme{Value: val(&pts[best]), At: pts[best].P, S: pts[best].S}
	prev, next := best-1, best+1
	if closed {
		prev, next = (best+n-1)%n, (best+1)%n
	}
	if n < 3 || prev < 0 || next >= n {
		return e
	}
	a, b, c := &pts[prev], &pts[best], &pts[next]
	// Only refine along one smooth piece: equal steps along one edge or arc, same normal family.
	sa, sc := b.S-a.S, c.S-b.S
	if closed {
		if sa <= 0 || sc <= 0 {
			return e
		}
	}
	if sa <= 0 || sc <= 0 || math.Abs(sa-sc) > 1e-6*(sa+sc) || a.N.Dot(c.N) < 0.95 {
		return e
	}
	fa, fb, fc := val(a), val(b), val(c)
	den := fa - 2*fb + fc
	if den == 0 {
		return e
	}
	off := 0.5 * (fa - fc) / den // in units of the step, within [−1/2, 1/2] at a true extreme
	if math.Abs(off) > 0.5 {
		return e
	}
	e.Value = fb - 0.25*(fa-fc)*off
	e.S = b.S + off*sa
	if off < 0 {
		e.At = b.P.Add(b.P.Sub(a.P).Scale(off))
	} else {
		e.At = b.P.Add(c.P.Sub(b.P).Scale(off))
	}
	return e
}

// MaxSpeed returns the highest speed on the surface and where it occurs.
func (s *Surface) MaxSpeed(closed bool) Extreme {
	return extreme(s.Points, closed, 1, func(v *SurfaceValue) float64 { return v.Speed })
}

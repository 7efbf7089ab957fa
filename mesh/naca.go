package mesh

import (
	"fmt"
	"math"
)

// NACA4 returns the polygon of a NACA 4-digit section "MPTT" (maximum camber M % of chord at P
// tenths of chord, thickness TT % of chord) with the given chord, leading edge and incidence
// (radians, nose-up positive: the section is turned clockwise about its leading edge). Each
// surface gets n points on a cosine distribution, dense at both edges.
//
// Thickness (NACA Report 460; Abbott & von Doenhoff, Theory of Wing Sections, eq. 6.2), with the
// last coefficient −0.1036 instead of −0.1015 so the trailing edge closes to a point:
//
//	y_t = 5t(0.2969√x − 0.1260x − 0.3516x² + 0.2843x³ − 0.1036x⁴)
//
// Camber: y_c = (m/p²)(2px − x²) for x < p and (m/(1−p)²)((1 − 2p) + 2px − x²) for x ≥ p; the
// surfaces are x ∓ y_t sin θ, y_c ± y_t cos θ with θ = atan(dy_c/dx).
func NACA4(code string, chord float64, le Point, incidence float64, n int) (*Polygon, error) {
	if len(code) != 4 {
		return nil, fmt.Errorf("NACA 4-digit code must have 4 digits, got %q", code)
	}
	var d [4]float64
	for i, c := range code {
		if c < '0' || c > '9' {
			return nil, fmt.Errorf("NACA 4-digit code must have 4 digits, got %q", code)
		}
		d[i] = float64(c - '0')
	}
	m, p, t := d[0]/100, d[1]/10, (10*d[2]+d[3])/100
	if t <= 0 || (m == 0) != (p == 0) || !(chord > 0) || n < 8 {
		return nil, fmt.Errorf("NACA %s with chord %g is not a valid section", code, chord)
	}
	camber := func(x float64) (yc, slope float64) {
		switch {
		case m == 0:
			return 0, 0
		case x < p:
			return m / (p * p) * (2*p*x - x*x), 2 * m / (p * p) * (p - x)
		default:
			q := (1 - p) * (1 - p)
			return m / q * ((1 - 2*p) + 2*p*x - x*x), 2 * m / q * (p - x)
		}
	}
	thick := func(x float64) float64 {
		return 5 * t * (0.2969*math.Sqrt(x) - 0.1260*x - 0.3516*x*x + 0.2843*x*x*x - 0.1036*x*x*x*x)
	}
	co, si := math.Cos(-incidence), math.Sin(-incidence)
	place := func(x, y float64) Point { return Point{x * chord, y * chord}.Rotate(co, si).Add(le) }
	pts := make([]Point, 0, 2*n)
	// Lower surface from the leading edge to the trailing edge, then the upper surface back: a
	// counter-clockwise outline. The trailing edge (x = 1) appears once.
	for k := 0; k <= n; k++ {
		x := 0.5 * (1 - math.Cos(math.Pi*float64(k)/float64(n)))
		yc, s := camber(x)
		th := math.Atan(s)
		yt := thick(x)
		pts = append(pts, place(x+yt*math.Sin(th), yc-yt*math.Cos(th)))
	}
	for k := n - 1; k >= 1; k-- {
		x := 0.5 * (1 - math.Cos(math.Pi*float64(k)/float64(n)))
		yc, s := camber(x)
		th := math.Atan(s)
		yt := thick(x)
		pts = append(pts, place(x-yt*math.Sin(th), yc+yt*math.Cos(th)))
	}
	return NewPolygon(pts)
}

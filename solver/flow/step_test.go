package flow

import (
	"math"
	"testing"

	"phipsi/mesh"
)

// stepSpeed is the exact speed on the flat wall of a sudden contraction from height h1 to h2 at
// x = 0 (a forward-facing step in the opposite wall), in units of the upstream speed U₁, by the
// Schwarz–Christoffel map (Milne-Thomson, Theoretical Hydrodynamics, ch. 10; REFERENCES item 4):
// with b = (h1/h2)² and s in (1, h1/h2) the flat wall is
// x(s) = (1/π)[h2 ln((s + 1)/(s − 1)) − h1 ln((h1/h2 + s)/(h1/h2 − s))] and the speed there is
// U₂/s, U₂ = U₁h1/h2. x(s) falls monotonically from +∞ to −∞ across (1, h1/h2): bisection.
func stepSpeed(h1, h2, x float64) float64 {
	c := h1 / h2
	xs := func(s float64) float64 {
		return (h2*math.Log((s+1)/(s-1)) - h1*math.Log((c+s)/(c-s))) / math.Pi
	}
	lo, hi := 1.0, c
	for range 200 {
		mid := 0.5 * (lo + hi)
		if xs(mid) > x {
			lo = mid
		} else {
			hi = mid
		}
	}
	return c / (0.5 * (lo + hi))
}

// TestSuddenContraction: the flat-wall speed of a sudden contraction against the exact
// Schwarz–Christoffel solution, within 0.5 % at 20 cells across the narrow part, away from the
// singular convex corner (not within 2 cells of it).
func TestSuddenContraction(t *testing.T) {
	// Values computed from the closed form before the project (REFERENCES item 4), to check the
	// reference function itself.
	published := []struct{ ratio, xh, speed float64 }{
		{4, 0, 3.3651977}, {4, -0.5, 2.6547336}, {4, 0.5, 3.8107859}, {1.5, 0, 1.3416408}, {1.5, 0.5, 1.4515047},
	}
	for _, p := range published {
		if got := stepSpeed(p.ratio, 1, p.xh); math.Abs(got-p.speed) > 1e-6 {
			t.Errorf("reference: ratio %g, x/H₂ = %g: %.7f, want %.7f", p.ratio, p.xh, got, p.speed)
		}
	}
	for _, ratio := range []float64{1.5, 4} {
		h2 := 0.25
		h1 := ratio * h2
		xs := 3 * h1 // inlet 3 H₁ upstream of the step
		l := xs + 8*h2
		lower, _ := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: l, Y: 0}}, false, false)
		upper, err := mesh.NewWall([]mesh.Point{{X: 0, Y: h1}, {X: xs, Y: h1}, {X: xs, Y: h2}, {X: l, Y: h2}}, false, true)
		if err != nil {
			t.Fatal(err)
		}
		h := h2 / 20
		r := run(t, &mesh.Geometry{Length: l, Lower: lower, Upper: upper}, h, nil, nil)
		pts := r.Surfaces[mesh.LowerWall].Points
		worst, at := 0.0, 0.0
		for _, xh := range []float64{-2, -1, -0.5, -0.25, 0, 0.25, 0.5, 1, 2} {
			x := xs + xh*h2
			got := interpSpeed(pts, x)
			want := stepSpeed(h1, h2, xh*h2)
			if rel := math.Abs(got/want - 1); rel > worst {
				worst, at = rel, xh
			}
		}
		t.Logf("ratio %g: worst flat-wall speed error %.3g %% at x/H₂ = %g", ratio, 100*worst, at)
		if worst > 0.005 {
			t.Errorf("ratio %g: flat-wall speed off by %.3g %% at x/H₂ = %g, want ≤ 0.5 %%", ratio, 100*worst, at)
		}
	}
}

// interpSpeed interpolates the wall speed linearly in x.
func interpSpeed(pts []SurfaceValue, x float64) float64 {
	for i := 1; i < len(pts); i++ {
		a, b := pts[i-1], pts[i]
		if a.P.X <= x && x <= b.P.X && b.P.X > a.P.X {
			f := (x - a.P.X) / (b.P.X - a.P.X)
			return a.Speed + f*(b.Speed-a.Speed)
		}
	}
	return math.NaN()
}

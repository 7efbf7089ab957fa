package render

import (
	"math"
	"testing"

	"phipsi/mesh"
)

// gridField samples f on a grid of nx × ny nodes at spacing h from the origin.
func gridField(nx, ny int, h float64, f func(x, y float64) float64) *nodeField {
	g := mesh.Grid{H: h, NX: nx, NY: ny}
	v := make([]float64, g.Len())
	for k := range v {
		p := g.At(k%nx, k/nx)
		v[k] = f(p.X, p.Y)
	}
	return &nodeField{g: g, v: v}
}

// TestContoursLinear: marching squares with linear interpolation is exact for a linear field,
// and each level of x + 2y is one open line from edge to edge of the grid.
func TestContoursLinear(t *testing.T) {
	const exactTol = 1e-12 // round-off of the interpolation
	f := gridField(41, 31, 0.1, func(x, y float64) float64 { return x + 2*y })
	levels := []float64{0.55, 1.5, 3.05, 7.3}
	for _, lv := range f.contours(levels) {
		if len(lv.lines) != 1 {
			t.Errorf("level %g: got %d lines, want 1", lv.value, len(lv.lines))
			continue
		}
		pl := lv.lines[0]
		if pl.closed {
			t.Errorf("level %g: got a closed line, want an open one", lv.value)
		}
		for _, p := range pl.pts {
			if d := math.Abs(p.X + 2*p.Y - lv.value); d > exactTol {
				t.Errorf("level %g: point %v is off by %g, want ≤ %g", lv.value, p, d, exactTol)
				break
			}
		}
		// The ends lie on the grid's boundary.
		for _, p := range []mesh.Point{pl.pts[0], pl.pts[len(pl.pts)-1]} {
			if !(p.X < exactTol || p.Y < exactTol || p.X > 4-exactTol || p.Y > 3-exactTol) {
				t.Errorf("level %g: end %v is not on the boundary", lv.value, p)
			}
		}
	}
}

// TestContoursCircle: a level of r² is one closed polyline, within the interpolation error of a
// quadratic (h²/(8r) along a link, so h²/r is a safe bound) of the exact circle.
func TestContoursCircle(t *testing.T) {
	const h = 0.05
	f := gridField(81, 81, h, func(x, y float64) float64 { return (x-2)*(x-2) + (y-2)*(y-2) })
	for _, r := range []float64{0.3, 1.0, 1.7} {
		cs := f.contours([]float64{r * r})
		if len(cs) != 1 || len(cs[0].lines) != 1 {
			t.Fatalf("r = %g: got %d lines, want 1", r, len(cs[0].lines))
		}
		pl := cs[0].lines[0]
		if !pl.closed || pl.pts[0] != pl.pts[len(pl.pts)-1] {
			t.Errorf("r = %g: line is not closed", r)
		}
		// A closed curve around the centre crosses about 8r/h cells.
		if n := len(pl.pts); float64(n) < 4*r/h {
			t.Errorf("r = %g: got %d points, want at least %g", r, n, 4*r/h)
		}
		tol := h * h / r
		for _, p := range pl.pts {
			if d := math.Abs(math.Hypot(p.X-2, p.Y-2) - r); d > tol {
				t.Errorf("r = %g: point %v is %g off the circle, want ≤ %g", r, p, d, tol)
				break
			}
		}
	}
}

// TestContoursSaddle: the hyperbolas xy = ±c around a saddle point come out as two separate
// branches each, not joined across the saddle.
func TestContoursSaddle(t *testing.T) {
	f := gridField(21, 21, 0.1, func(x, y float64) float64 { return (x - 1.05) * (y - 0.95) })
	for _, c := range []float64{0.02, -0.02} {
		cs := f.contours([]float64{c})
		if n := len(cs[0].lines); n != 2 {
			t.Errorf("level %g: got %d lines, want 2 branches", c, n)
		}
	}
}

// TestContoursBoundaryAware: on a mesh with a body, stream-function contours placed with the
// exact link crossings never enter the body; plain interpolation toward the solid nodes does
// (which the check must be able to see, or it proves nothing).
func TestContoursBoundaryAware(t *testing.T) {
	const h = 0.05
	circle := mesh.NewCircle(mesh.Point{X: 1, Y: 0.5}, 0.21)
	geo := straightChannel(t, 2, 1, mesh.Body{Name: "c", Shape: circle})
	g, err := mesh.PlanGrid(2, 0, 1, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	// ψ = y in the fluid and the body at ψ = 0.5: the levels above 0.5 wrap over the body's top.
	v := make([]float64, g.Len())
	for k := range v {
		switch {
		case m.IsFluid(k):
			v[k] = g.Y(k / g.NX)
		case m.Owner[k] == mesh.LowerWall:
			v[k] = 0
		case m.Owner[k] == mesh.UpperWall:
			v[k] = 1
		default:
			v[k] = 0.5
		}
	}
	bval := func(id int) float64 { return []float64{0, 1, 0.5}[id] }
	levels := []float64{0.52, 0.6, 0.66}
	// inside reports whether p is inside the body by more than round-off.
	inside := func(p mesh.Point) bool { return math.Hypot(p.X-1, p.Y-0.5) < 0.21-1e-9 }
	count := func(f *nodeField) int {
		n := 0
		for _, lv := range f.contours(levels) {
			for _, pl := range lv.lines {
				for _, p := range pl.pts {
					if inside(p) {
						n++
					}
				}
			}
		}
		return n
	}
	if n := count(&nodeField{g: g, v: v, m: m, boundary: bval}); n != 0 {
		t.Errorf("boundary-aware contours: %d points inside the body, want 0", n)
	}
	if n := count(&nodeField{g: g, v: v}); n == 0 {
		t.Errorf("plain contours: no point inside the body; the check cannot tell the two apart")
	}
}

// TestContoursBranchCut: the potential of a vortex, φ = Γθ/2π, jumps by Γ across θ = ±π.
// With maxJump set, no equipotential is drawn along the cut; without it, one is.
func TestContoursBranchCut(t *testing.T) {
	const h, gamma = 0.05, 1.0
	f := gridField(41, 41, h, func(x, y float64) float64 {
		return gamma * math.Atan2(y-1.025, x-1.025) / (2 * math.Pi)
	})
	var levels []float64
	for k := -9; k <= 9; k++ {
		levels = append(levels, float64(k)*0.05)
	}
	// onCut reports a point in the cut's cells: within a cell of y = 1.025, left of the centre
	// by more than 6h (nearer, the levels next to the cut, θ = ±162°, come within a cell of it).
	onCut := func(p mesh.Point) bool { return p.X < 1.025-6*h && math.Abs(p.Y-1.025) < h }
	hits := func(f *nodeField) int {
		n := 0
		for _, lv := range f.contours(levels) {
			for _, pl := range lv.lines {
				for _, p := range pl.pts {
					if onCut(p) {
						n++
					}
				}
			}
		}
		return n
	}
	if n := hits(f); n == 0 {
		t.Fatalf("without maxJump: no contour along the cut; the check cannot tell")
	}
	// The fastest flow here is at the cells nearest the centre, about Γ/(2π·h/2); the cut's
	// jump across one cell is Γ.
	f.maxJump = 0.5 * gamma
	if n := hits(f); n != 0 {
		t.Errorf("with maxJump: %d contour points along the cut, want 0", n)
	}
}

// TestTicks checks the round steps, tick positions and number formats of the axes.
func TestTicks(t *testing.T) {
	steps := []struct {
		span float64
		n    int
		want float64
	}{
		{10, 5, 2}, {3, 6, 0.5}, {1, 4, 0.2}, {0.34, 8, 0.05}, {6, 12, 0.5}, {250, 5, 50}, {7, 1, 5},
	}
	for _, tc := range steps {
		if got := niceStep(tc.span, tc.n); math.Abs(got-tc.want) > 1e-12*tc.want {
			t.Errorf("niceStep(%g, %d) = %g, want %g", tc.span, tc.n, got, tc.want)
		}
	}
	got := ticks(-0.35, 0.02, 0.05)
	want := []float64{-0.35, -0.3, -0.25, -0.2, -0.15, -0.1, -0.05, 0}
	if len(got) != len(want) {
		t.Fatalf("ticks(−0.35, 0.02, 0.05) = %v, want %v", got, want)
	}
	for i := range got {
		if math.Abs(got[i]-want[i]) > 1e-12 {
			t.Errorf("tick %d: got %g, want %g", i, got[i], want[i])
		}
	}
	formats := []struct {
		got, want string
	}{
		{formatNum(-0.25, decimals(0.05)), "−0.25"},
		{formatNum(-0.0001, 2), "0.00"},
		{formatNum(3, decimals(0.5)), "3.0"},
		{formatSig(0.8, 4), "0.8"},
		{formatSig(998.2, 5), "998.2"},
		{formatSig(-3.4127, 3), "−3.41"},
		{formatSig(12, 4), "12"},
		{formatLength(0.005), "5 mm"},
		{formatLength(0.25), "0.25 m"},
		{groupDigits(1234567), "1 234 567"},
	}
	for _, tc := range formats {
		if tc.got != tc.want {
			t.Errorf("got %q, want %q", tc.got, tc.want)
		}
	}
}

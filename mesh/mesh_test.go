package mesh

import (
	"math"
	"math/rand/v2"
	"testing"
)

func straightChannel(t *testing.T, l, h float64, bodies ...Body) *Geometry {
	t.Helper()
	lo, err := NewWall([]Point{{0, 0}, {l, 0}}, false, false)
	if err != nil {
		t.Fatal(err)
	}
	up, err := NewWall([]Point{{0, h}, {l, h}}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	return &Geometry{Length: l, Lower: lo, Upper: up, Bodies: bodies}
}

func build(t *testing.T, geo *Geometry, h float64) *Mesh {
	t.Helper()
	ylo, _ := geo.Lower.Extent()
	_, yhi := geo.Upper.Extent()
	g, err := PlanGrid(geo.Length, ylo, yhi, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

// armEnd returns the point an arm of node k ends at.
func armEnd(m *Mesh, k, d int, a Arm) Point {
	steps := [4]Point{{1, 0}, {-1, 0}, {0, 1}, {0, -1}}
	return m.At(k%m.NX, k/m.NX).Add(steps[d].Scale(a.Theta * m.H))
}

// TestArmsEndOnBoundary: every cut arm ends on the boundary it names, to round-off, for each kind
// of outline; and every fluid node's classification agrees with the geometry.
func TestArmsEndOnBoundary(t *testing.T) {
	rect, _ := NewRectangle(Point{2.6, 0.45}, 0.3, 0.12, 0.4, 0.03)
	naca, err := NACA4("2412", 0.4, Point{1.1, 0.5}, 6*math.Pi/180, 200)
	if err != nil {
		t.Fatal(err)
	}
	c := Point{0.55 + 1e-3*math.Pi, 0.41}
	el := NewEllipse(Point{1.8, 0.62}, 0.15, 0.06, -0.3)
	geo := straightChannel(t, 3.2, 1.03, Body{"c", NewCircle(c, 0.17)}, Body{"f", naca}, Body{"e", el}, Body{"r", rect})
	m := build(t, geo, 0.0137)
	// onBoundary is how far from the outline a computed crossing may lie: round-off in the
	// quadratic roots and segment parameters, scaled by the domain size.
	const onBoundary = 1e-12
	dist := map[int]func(p Point) float64{
		LowerWall: func(p Point) float64 { return math.Abs(p.Y) },
		UpperWall: func(p Point) float64 { return math.Abs(p.Y - 1.03) },
		BodyID(0): func(p Point) float64 { return math.Abs(p.Sub(c).Norm() - 0.17) },
		BodyID(2): func(p Point) float64 {
			q := p.Sub(el.C).Rotate(el.co, -el.si)
			return math.Abs(math.Hypot(q.X/el.A, q.Y/el.B) - 1)
		},
	}
	checked := 0
	for _, cn := range m.Cuts {
		for d, a := range cn.Arms {
			if f, ok := dist[a.Boundary]; ok {
				if e := f(armEnd(m, cn.Node, d, a)); e > onBoundary {
					t.Errorf("node %d dir %d: arm ends %.3g off %s", cn.Node, d, e, m.BoundaryName(a.Boundary))
				}
				checked++
			}
			if a.Boundary >= 2 {
				// Outlines without a closed-form distance: a point a hair beyond the arm's end
				// must be inside the body, a hair short of it outside.
				p := armEnd(m, cn.Node, d, a)
				node := m.At(cn.Node%m.NX, cn.Node/m.NX)
				dir := p.Sub(node)
				if dir.Norm() < 1e-9 {
					continue
				}
				dir = dir.Scale(1 / dir.Norm())
				shape := geo.Bodies[a.Boundary-2].Shape
				if shape.Contains(p.Sub(dir.Scale(1e-9))) || !shape.Contains(p.Add(dir.Scale(1e-9))) && !thinHere(shape, p, dir) {
					t.Errorf("node %d dir %d: arm to %s does not end where the outline is crossed", cn.Node, d, m.BoundaryName(a.Boundary))
				}
			}
		}
	}
	if checked < 100 {
		t.Fatalf("only %d arms checked", checked)
	}
	for k := range m.Kind {
		p := m.At(k%m.NX, k/m.NX)
		if m.Kind[k] == Fluid && !geo.InFluid(p) && p.X > 0 && p.X < geo.Length {
			t.Errorf("node %d at %v is Fluid but not in the fluid", k, p)
		}
		if m.Kind[k] == Solid && geo.InFluid(p) {
			t.Errorf("node %d at %v is Solid but in the fluid", k, p)
		}
	}
}

// thinHere reports whether the outline is so thin at p that a point just beyond it is outside
// again (a trailing edge).
func thinHere(s Shape, p, dir Point) bool { return !s.Contains(p.Add(dir.Scale(1e-12))) }

// TestThinBodyCutFromBothSides: a plate thinner than the grid spacing, lying between two rows,
// leaves every node fluid, yet each vertical link across it is cut from both ends.
func TestThinBodyCutFromBothSides(t *testing.T) {
	plate, err := NewPolygon([]Point{{1, 0.503}, {2, 0.503}, {2, 0.507}, {1, 0.507}})
	if err != nil {
		t.Fatal(err)
	}
	geo := straightChannel(t, 3, 1, Body{"plate", plate})
	m := build(t, geo, 0.05) // rows at y = 0.5 and 0.55: the plate lies between them
	j := 10
	for i := 21; i < 40; i++ {
		below, above := m.Index(i, j), m.Index(i, j+1)
		if m.Kind[below] != Fluid || m.Kind[above] != Fluid {
			t.Fatalf("nodes around the plate must be fluid, got %d and %d", m.Kind[below], m.Kind[above])
		}
		ab, _ := m.Arms(below)
		aa, _ := m.Arms(above)
		if ab[North].Boundary != BodyID(0) || math.Abs(ab[North].Theta-0.06) > 1e-9 {
			t.Errorf("i = %d: arm up from below = %+v, want θ = 0.06 to the plate", i, ab[North])
		}
		if aa[South].Boundary != BodyID(0) || math.Abs(aa[South].Theta-0.86) > 1e-9 {
			t.Errorf("i = %d: arm down from above = %+v, want θ = 0.86 to the plate", i, aa[South])
		}
	}
}

// TestNodeOnBoundaryPinned: a node exactly on a circle is pinned to the circle's value.
func TestNodeOnBoundaryPinned(t *testing.T) {
	geo := straightChannel(t, 2, 1, Body{"c", NewCircle(Point{1, 0.5}, 0.25)})
	m := build(t, geo, 0.05) // (1.25, 0.5) and (1, 0.75) lie on the circle
	for _, p := range []Point{{1.25, 0.5}, {0.75, 0.5}, {1, 0.75}, {1, 0.25}} {
		k := m.Index(int(math.Round(p.X/0.05)), int(math.Round(p.Y/0.05)))
		if m.Kind[k] != Pinned && m.Kind[k] != Solid {
			t.Errorf("node at %v: kind %d, want Pinned or Solid", p, m.Kind[k])
		}
		if int(m.Owner[k]) != BodyID(0) {
			t.Errorf("node at %v: owner %d, want the circle", p, m.Owner[k])
		}
	}
}

// TestSampleWeights: sample weights add up to the perimeter and normals are unit and outward.
func TestSampleWeights(t *testing.T) {
	rr, _ := NewRectangle(Point{0, 0}, 2, 1, 0.3, 0.2)
	sq, _ := NewRectangle(Point{0, 0}, 2, 1, 0, 0)
	tri, _ := NewPolygon([]Point{{0, 0}, {0, 1}, {1, 0}}) // clockwise on purpose
	cases := []struct {
		name      string
		s         Shape
		perimeter float64
	}{
		{"circle", NewCircle(Point{1, 1}, 0.5), math.Pi},
		{"rounded rectangle", rr, 2*(2+1) - (8-2*math.Pi)*0.2},
		{"rectangle", sq, 6},
		{"triangle given clockwise", tri, 2 + math.Sqrt2},
	}
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			pts := tc.s.Sample(0.01)
			sum := 0.0
			for _, p := range pts {
				sum += p.W
				if math.Abs(p.N.Norm()-1) > 1e-12 {
					t.Fatalf("normal %v is not a unit vector", p.N)
				}
				if tc.s.Contains(p.P.Add(p.N.Scale(1e-6))) || !tc.s.Contains(p.P.Sub(p.N.Scale(1e-6))) {
					t.Fatalf("normal at %v does not point out of the body", p.P)
				}
			}
			if math.Abs(sum-tc.perimeter) > 1e-9*tc.perimeter {
				t.Errorf("weights sum to %.12g, want the perimeter %.12g", sum, tc.perimeter)
			}
		})
	}
}

// TestNACAThickness: a NACA 0012 is 12 % thick at about 30 % chord and closes at the trailing edge
// (NACA Report 460; Abbott & von Doenhoff eq. 6.2; the −0.1036 coefficient closes the edge).
func TestNACAThickness(t *testing.T) {
	p, err := NACA4("0012", 1, Point{0, 0}, 0, 400)
	if err != nil {
		t.Fatal(err)
	}
	maxT, at := 0.0, 0.0
	for _, q := range p.Pts {
		if 2*q.Y > maxT {
			maxT, at = 2*q.Y, q.X
		}
	}
	// The 4-digit thickness peaks at 0.12 near x = 0.30 (Abbott & von Doenhoff, appendix I).
	if math.Abs(maxT-0.12) > 2e-4 || math.Abs(at-0.30) > 0.01 {
		t.Errorf("max thickness %.5f at x = %.3f, want 0.12 at about 0.30", maxT, at)
	}
	cs := p.Corners()
	sharp := cs[0]
	for _, c := range cs {
		if c.Angle < sharp.Angle {
			sharp = c
		}
	}
	if math.Abs(sharp.P.X-1) > 1e-12 || math.Abs(sharp.P.Y) > 1e-12 {
		t.Errorf("sharpest corner at %v, want the trailing edge (1, 0)", sharp.P)
	}
	// Trailing-edge angle of the closed 4-digit section: 2·atan(|dy_t/dx| at x = 1), with
	// dy_t/dx = 5t(0.14845 − 0.1260 − 0.7032 + 0.8529 − 0.4144) = −0.1266 for t = 0.12.
	want := 2 * math.Atan(0.12*5*math.Abs(0.2969/2-0.1260-2*0.3516+3*0.2843-4*0.1036))
	if math.Abs(sharp.Angle-want) > 0.01 {
		t.Errorf("trailing-edge angle %.4f rad, want about %.4f", sharp.Angle, want)
	}
	if _, err := NACA4("6409", 1, Point{}, 0, 100); err != nil {
		t.Errorf("6409 is a valid code: %v", err)
	}
	for _, bad := range []string{"241", "20a2", "0000", "0212", "2012"} {
		if _, err := NACA4(bad, 1, Point{}, 0, 100); err == nil {
			t.Errorf("NACA %q accepted, want an error", bad)
		}
	}
}

// TestSelfIntersectingPolygon: a bow-tie outline is refused.
func TestSelfIntersectingPolygon(t *testing.T) {
	if _, err := NewPolygon([]Point{{0, 0}, {1, 1}, {1, 0}, {0, 1}}); err == nil {
		t.Error("bow-tie polygon accepted, want an error")
	}
	if _, err := NewPolygon([]Point{{0, 0}, {1, 0}, {1, 0}, {1, 1}, {0, 0}}); err != nil {
		t.Errorf("repeated points should be dropped, got %v", err)
	}
}

// TestWallProfiles: a stepped wall classifies the step face; a smooth wall never overshoots its
// points (Fritsch & Butland 1984: monotone data give a monotone interpolant).
func TestWallProfiles(t *testing.T) {
	pts := []Point{{0, 0}, {1, 0}, {1, 0.5}, {2, 0.5}, {3, 0.5}}
	w, err := NewWall(pts, true, false)
	if err != nil {
		t.Fatal(err)
	}
	if lo, hi := w.Range(1); lo != 0 || hi != 0.5 {
		t.Errorf("Range at the step = %g..%g, want 0..0.5", lo, hi)
	}
	if y := w.Y(0.5); y != 0 {
		t.Errorf("Y(0.5) = %g, want 0", y)
	}
	smooth, _ := NewWall([]Point{{0, 1}, {1, 1}, {1.5, 0.8}, {2, 0.5}, {3, 0.5}}, true, true)
	for x := 0.0; x <= 3; x += 0.001 {
		y := smooth.Y(x)
		if y > 1+1e-12 || y < 0.5-1e-12 {
			t.Fatalf("smooth wall at x = %g: y = %g overshoots [0.5, 1]", x, y)
		}
	}
	// CrossHorizontal finds y(x) = c to round-off on the cubic.
	xs := smooth.CrossHorizontal(nil, 0.7, 0, 3)
	if len(xs) != 1 || math.Abs(smooth.Y(xs[0])-0.7) > 1e-12 {
		t.Errorf("crossings of y = 0.7: %v, want one root with y = 0.7", xs)
	}
	if _, err := NewWall([]Point{{0, 0}, {1, 0}, {0.5, 0}}, false, false); err == nil {
		t.Error("decreasing x accepted, want an error")
	}
}

// TestIntersectMatchesContains: along random segments, the number of crossings is odd exactly
// when one end is inside and the other outside.
func TestIntersectMatchesContains(t *testing.T) {
	rr, _ := NewRectangle(Point{0.1, -0.05}, 1.2, 0.5, 0.7, 0.15)
	naca, _ := NACA4("4415", 1, Point{-0.5, 0}, 0.2, 150)
	shapes := map[string]Shape{"ellipse": NewEllipse(Point{0.02, 0.01}, 0.6, 0.25, 1.1), "rounded rectangle": rr, "naca": naca}
	rng := rand.New(rand.NewPCG(3, 4))
	for name, s := range shapes {
		for range 20000 {
			a := Point{rng.Float64()*2 - 1, rng.Float64()*2 - 1}
			b := Point{rng.Float64()*2 - 1, rng.Float64()*2 - 1}
			n := len(s.Intersect(nil, a, b))
			if (n%2 == 1) != (s.Contains(a) != s.Contains(b)) {
				t.Fatalf("%s: segment %v–%v has %d crossings but ends inside: %v, %v", name, a, b, n, s.Contains(a), s.Contains(b))
			}
		}
	}
}

// TestPlanGrid keeps the outlet on a node column and covers both walls.
func TestPlanGrid(t *testing.T) {
	g, err := PlanGrid(6, 0, 1, 0.007)
	if err != nil {
		t.Fatal(err)
	}
	if got := g.X(g.NX - 1); math.Abs(got-6) > 1e-12 {
		t.Errorf("last column at %g, want 6", got)
	}
	if g.H > 0.007 || g.Y(g.NY-1) < 1 {
		t.Errorf("spacing %g (want ≤ 0.007), last row %g (want ≥ 1)", g.H, g.Y(g.NY-1))
	}
	if _, err := PlanGrid(6, 0, 1, 1e-9); err == nil {
		t.Error("a 1e19-cell grid was planned, want an error")
	}
}

// TestWallSampleBetween checks that SampleBetween returns Sample's points, with the same arc
// lengths, for every piece that reaches into the range, on a smooth wall and on one with a step.
func TestWallSampleBetween(t *testing.T) {
	for _, smooth := range []bool{false, true} {
		w, err := NewWall([]Point{{0, 0}, {1, 0.1}, {2, 0.1}, {2, 0.4}, {3, 0.3}, {4, 0.3}}, smooth, false)
		if err != nil {
			t.Fatal(err)
		}
		const ds = 0.01
		all := w.Sample(ds)
		// Sample covers the whole wall: its weights add up to the arc length, which for this
		// wall is at least the x extent plus the step's height.
		total := 0.0
		for _, p := range all {
			total += p.W
		}
		if last := all[len(all)-1]; total < 4.3 || math.Abs(last.S+last.W/2-total) > 1e-9 {
			t.Fatalf("smooth %v: weights add up to %g, last point's S + W/2 = %g; want equal and ≥ 4.3", smooth, total, last.S+last.W/2)
		}
		for _, r := range [][2]float64{{1.5, 2.5}, {2, 2}, {-1, 5}, {3.2, 3.3}} {
			got := w.SampleBetween(r[0], r[1], ds)
			in := map[SurfacePoint]bool{}
			for _, p := range all {
				in[p] = true
			}
			for _, p := range got {
				if !in[p] {
					t.Fatalf("smooth %v, range %v: point %+v is not one of Sample's", smooth, r, p)
				}
			}
			have := map[SurfacePoint]bool{}
			for _, p := range got {
				have[p] = true
			}
			for _, p := range all {
				if p.P.X >= r[0] && p.P.X <= r[1] && !have[p] {
					t.Fatalf("smooth %v, range %v: Sample's point %+v in the range is missing", smooth, r, p)
				}
			}
			if len(got) >= len(all) && r[0] > 0 {
				t.Errorf("smooth %v, range %v: %d points of %d, want fewer", smooth, r, len(got), len(all))
			}
		}
	}
}

package flow

import (
	"context"
	"math"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
	"phipsi/solver"
)

// channel returns a straight channel from x = 0 to l between y0 and y1 with the given bodies.
func channel(t *testing.T, l, y0, y1 float64, bodies ...mesh.Body) *mesh.Geometry {
	t.Helper()
	lower, err := mesh.NewWall([]mesh.Point{{X: 0, Y: y0}, {X: l, Y: y0}}, false, false)
	if err != nil {
		t.Fatal(err)
	}
	upper, err := mesh.NewWall([]mesh.Point{{X: 0, Y: y1}, {X: l, Y: y1}}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	return &mesh.Geometry{Length: l, Lower: lower, Upper: upper, Bodies: bodies}
}

// run solves geometry geo at spacing h with U = 1, ρ = 1000 and derives the flow.
func run(t *testing.T, geo *mesh.Geometry, h float64, bodies []bc.Body, conds func(*bc.Set)) *Result {
	t.Helper()
	lo, _ := geo.Lower.Extent()
	_, hi := geo.Upper.Extent()
	g, err := mesh.PlanGrid(geo.Length, lo, hi, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	if bodies == nil {
		bodies = make([]bc.Body, len(geo.Bodies))
	}
	s, err := bc.New(m, 1, bodies)
	if err != nil {
		t.Fatal(err)
	}
	if conds != nil {
		conds(s)
	}
	sys, err := solver.AssemblePsi(m, s)
	if err != nil {
		t.Fatal(err)
	}
	sol, err := solver.SolvePsi(context.Background(), sys, solver.MethodAuto, &solver.Settings{Tolerance: 1e-12})
	if err != nil {
		t.Fatal(err)
	}
	r, err := Derive(sol, Fluid{Density: 1000})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// cylinderPsi is the exact stream function of a uniform stream U = 1 past a cylinder of radius a
// at c with circulation gamma (counter-clockwise positive): ψ = U(r − a²/r) sin θ − (Γ/2π) ln(r/a)
// (Milne-Thomson, Theoretical Hydrodynamics, ch. 6; Anderson, Fundamentals of Aerodynamics §3.15).
func cylinderPsi(c mesh.Point, a, gamma float64) func(p mesh.Point) float64 {
	return func(p mesh.Point) float64 {
		d := p.Sub(c)
		r := d.Norm()
		return (r-a*a/r)*d.Y/r - gamma/(2*math.Pi)*math.Log(r/a)
	}
}

// TestCylinderFarField: uniform flow past a cylinder with the exact far field imposed on a box,
// 40 cells per diameter. Surface speed 2U|sin θ| (Cp = 1 − 4 sin²θ; Milne-Thomson ch. 6), zero
// drag (d'Alembert).
func TestCylinderFarField(t *testing.T) {
	const a = 0.5
	c := mesh.Point{X: 2 + 0.0123, Y: 2 + 0.0071} // off the grid's symmetry
	geo := channel(t, 4, 0, 4, mesh.Body{Name: "cyl", Shape: mesh.NewCircle(c, a)})
	r := run(t, geo, 2*a/40, nil, func(s *bc.Set) { s.Outer = cylinderPsi(c, a, 0) })
	pts := r.Surfaces[2].Points
	worst := 0.0
	for _, p := range pts {
		d := p.P.Sub(c)
		exact := 2 * math.Abs(d.Y/d.Norm())
		worst = math.Max(worst, math.Abs(p.Speed-exact))
	}
	b := r.Body(0)
	peakErr := math.Abs(b.MaxSpeed.Value/2 - 1)
	cd := b.Force[0] / (r.Q2() * 2 * a)
	t.Logf("peak %.6f (error %.3g%%), worst surface error %.3g%% of 2U, C_D %.2e", b.MaxSpeed.Value, 100*peakErr, 100*worst/2, cd)
	// Tolerances are the bars at 40 cells per diameter.
	if peakErr > 0.002 {
		t.Errorf("peak speed %.6f U, want 2U within 0.2 %%", b.MaxSpeed.Value)
	}
	if worst > 0.005*2 {
		t.Errorf("worst surface speed error %.4f U, want ≤ 0.5 %% of 2U", worst)
	}
	if math.Abs(cd) > 5e-3 {
		t.Errorf("C_D = %.3g, want |C_D| ≤ 5e-3 (d'Alembert: zero)", cd)
	}
}

// TestCylinderCirculation: a cylinder given Γ = 2πaU, exact far field with the vortex term:
// stagnation points at sin θ_s = Γ/(4πUa) = 1/2, i.e. 30° and 150° (Anderson §3.15), and side
// force F_y = −ρUΓ (Kutta–Joukowski).
func TestCylinderCirculation(t *testing.T) {
	const a = 0.5
	gamma := 2 * math.Pi * a
	c := mesh.Point{X: 2 + 0.0123, Y: 2 + 0.0071}
	geo := channel(t, 4, 0, 4, mesh.Body{Name: "cyl", Shape: mesh.NewCircle(c, a)})
	r := run(t, geo, 2*a/40, []bc.Body{{Circulation: gamma}}, func(s *bc.Set) { s.Outer = cylinderPsi(c, a, gamma) })
	b := r.Body(0)
	if len(b.Stagnation) != 2 {
		t.Fatalf("found %d stagnation points %v, want 2", len(b.Stagnation), b.Stagnation)
	}
	want := []float64{30, 150}
	var got []float64
	for _, p := range b.Stagnation {
		d := p.Sub(c)
		got = append(got, math.Atan2(d.Y, d.X)*180/math.Pi)
	}
	if got[0] > got[1] {
		got[0], got[1] = got[1], got[0]
	}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1 {
			t.Errorf("stagnation angle %.3f°, want %g° within 1°", got[i], want[i])
		}
	}
	lift := -r.Fluid.Density * r.Speed * gamma
	if rel := math.Abs(b.Force[1]/lift - 1); rel > 0.01 {
		t.Errorf("F_y = %.5g N/m, want −ρUΓ = %.5g within 1 %% (off by %.3g %%)", b.Force[1], lift, 100*rel)
	}
	if math.Abs(b.Circulation-gamma) > 1e-8 {
		t.Errorf("circulation %.10g, want %g", b.Circulation, gamma)
	}
	t.Logf("stagnation at %.3f° and %.3f°, F_y/(−ρUΓ) − 1 = %.2e", got[0], got[1], b.Force[1]/lift-1)
}

// TestWallSpeedOrder: ψ = eˣ sin y imposed on a box and an off-grid circle (REFERENCES item 7):
// the fitted wall speed |∂ψ/∂n| converges at second order (prototype: 0.014 % at 80 cells per
// diameter).
func TestWallSpeedOrder(t *testing.T) {
	f := func(p mesh.Point) float64 { return math.Exp(p.X) * math.Sin(p.Y) }
	c := mesh.Point{X: 0.5 + 1/(100*math.Pi), Y: 0.5 + math.Sqrt2/300}
	const a = 0.2
	geo := channel(t, 1, 0, 1, mesh.Body{Name: "c", Shape: mesh.NewCircle(c, a)})
	hs := []float64{2 * a / 10, 2 * a / 20, 2 * a / 40, 2 * a / 80}
	var errs []float64
	for _, h := range hs {
		r := run(t, geo, h, nil, func(s *bc.Set) { s.Outer, s.Prescribed = f, f })
		worst := 0.0
		for _, p := range r.Surfaces[2].Points {
			e := math.Exp(p.P.X)
			exact := math.Abs(e*math.Sin(p.P.Y)*p.N.X + e*math.Cos(p.P.Y)*p.N.Y)
			worst = math.Max(worst, math.Abs(p.Speed-exact))
		}
		errs = append(errs, worst)
	}
	for i := 1; i < len(errs); i++ {
		order := math.Log(errs[i-1]/errs[i]) / math.Log(hs[i-1]/hs[i])
		t.Logf("%.0f cells per diameter: max wall-speed error %.3g, order %.2f", 2*a/hs[i], errs[i], order)
		// Second order expected (Yoon & Min 2016); the issue asks for at least 1.7.
		if order < 1.7 {
			t.Errorf("wall-speed order %.3f at h = %g, want ≥ 1.7", order, hs[i])
		}
	}
}

// TestChannelCylinderPeak: a cylinder on the centreline of a channel. Exact peak speeds computed
// from the image-series solution by two independent methods (REFERENCES item 2; first-order form
// ε = (π²/12)(d/H)², Allen & Vincenti, NACA Report 782): within 0.5 % at 40 cells per diameter.
func TestChannelCylinderPeak(t *testing.T) {
	cases := []struct {
		dH, exact float64
		long      bool
	}{
		{0.3, 2.16724786, false},
		{0.1, 2.01666792, true},
	}
	for _, tc := range cases {
		if tc.long && testing.Short() {
			continue
		}
		d := tc.dH
		// The disturbance decays like exp(−2π|x|/H): 2.5H each side is enough (REFERENCES item 2).
		geo := channel(t, 5, 0, 1, mesh.Body{Name: "c", Shape: mesh.NewCircle(mesh.Point{X: 2.5 + 0.0013, Y: 0.5}, d/2)})
		r := run(t, geo, d/40, nil, nil)
		b := r.Body(0)
		rel := b.MaxSpeed.Value/tc.exact - 1
		t.Logf("d/H = %g: peak %.7f U, exact %.8f U, error %.3g %%", d, b.MaxSpeed.Value, tc.exact, 100*rel)
		if math.Abs(rel) > 0.005 {
			t.Errorf("d/H = %g: peak speed %.6f U, want %.6f U within 0.5 %%", d, b.MaxSpeed.Value, tc.exact)
		}
		if fx := b.Force[0] / (r.Q2() * d); math.Abs(fx) > 5e-3 {
			t.Errorf("d/H = %g: C_D = %.3g, want 0 (d'Alembert; the channel flow is fore-aft symmetric)", d, fx)
		}
	}
}

// TestEmptyChannel: an empty straight channel carries uniform flow: u = U and v = 0 at every node
// and on both walls, and the flow rate is U·H exactly.
func TestEmptyChannel(t *testing.T) {
	r := run(t, channel(t, 3, 0, 1.3), 0.05, nil, nil)
	if r.Q != 1.3 {
		t.Errorf("flow rate %.17g, want 1.3 exactly", r.Q)
	}
	f := r.Field
	for k, ok := range f.Valid {
		if ok && (math.Abs(f.U[k]-1) > 1e-9 || math.Abs(f.V[k]) > 1e-9) {
			t.Fatalf("node %d: (u, v) = (%.12g, %.3g), want (1, 0)", k, f.U[k], f.V[k])
		}
	}
	for _, s := range r.Surfaces[:2] {
		for _, p := range s.Points {
			if math.Abs(p.Speed-1) > 1e-9 {
				t.Fatalf("%s wall at x = %g: speed %.12g, want 1", s.Name, p.P.X, p.Speed)
			}
		}
	}
}

package render

import (
	"context"
	"math"
	"math/cmplx"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
	"phipsi/solver"
	"phipsi/solver/flow"
)

// Test flows. The golden images are drawn from analytic fields filled in on a real mesh, so they
// change only when the drawing changes, never with the solver; a separate test runs the real
// pipeline.

// doublet is the ideal flow past a near-circular body of radius a on the centreline of a straight
// channel of height H: an infinite row of doublets at spacing H along y (the image system of
// parallel walls, as in Milne-Thomson, Theoretical Hydrodynamics; from memory), whose complex
// potential, by the partial-fraction series Σ 1/(z − inH) = (π/H) coth(πz/H), is
//
//	w(z) = U z′ + U k² (π/H) coth(π z′/H),  z′ = z − z_c,
//
// keeps both walls (y′ = ±H/2, where coth is real) on streamlines. The images add a uniform
// stream U k²π²/(3H²) near the body, so k² = a²(1 + π²k²/(3H²)) makes the dividing streamline
// the circle of radius a to O(a⁴/H⁴).
type doublet struct {
	U, H, a float64
	zc      complex128
	k2      float64
}

func newDoublet(U, H, a float64, c mesh.Point) doublet {
	k2 := a * a
	for range 4 {
		k2 = a * a * (1 + math.Pi*math.Pi*k2/(3*H*H))
	}
	return doublet{U: U, H: H, a: a, zc: complex(c.X, c.Y), k2: k2}
}

// w returns the complex potential φ + iψ at p, with ψ = 0 on the lower wall (y = c.Y − H/2).
func (d doublet) w(p mesh.Point) complex128 {
	z := complex(p.X, p.Y) - d.zc
	s := complex(math.Pi/d.H, 0) * z
	return complex(d.U, 0)*z + complex(d.U*d.k2*math.Pi/d.H, 0)*cmplx.Cosh(s)/cmplx.Sinh(s) + complex(0, d.U*d.H/2)
}

// vel returns the velocity (u, v) at p: u − iv = dw/dz = U − U k² (π/H)² / sinh²(π z′/H).
func (d doublet) vel(p mesh.Point) (float64, float64) {
	z := complex(p.X, p.Y) - d.zc
	sh := cmplx.Sinh(complex(math.Pi/d.H, 0) * z)
	dw := complex(d.U, 0) - complex(d.U*d.k2*math.Pi*math.Pi/(d.H*d.H), 0)/(sh*sh)
	return real(dw), -imag(dw)
}

// fillResult builds a Result on mesh m from a velocity field and stream function given as
// functions, as the solver and flow.Derive would leave it;
// surfVel gives the velocity on the walls and bodies.
func fillResult(t testing.TB, m *mesh.Mesh, U, rho float64, psiAt func(mesh.Point) float64, vel, surfVel func(mesh.Point) (float64, float64), bodyPsi, circ []float64) *flow.Result {
	t.Helper()
	bodies := make([]bc.Body, len(m.Geom.Bodies))
	set, err := bc.New(m, U, bodies)
	if err != nil {
		t.Fatal(err)
	}
	g := m.Grid
	n := g.Len()
	psi := make([]float64, n)
	f := &flow.Field{Grid: g, Valid: make([]bool, n), U: make([]float64, n), V: make([]float64, n),
		Speed: make([]float64, n), Cp: make([]float64, n), Pressure: make([]float64, n)}
	q2 := 0.5 * rho * U * U
	for k := range n {
		p := g.At(k%g.NX, k/g.NX)
		switch {
		case m.IsFluid(k):
			psi[k] = psiAt(p)
			u, v := vel(p)
			sp := math.Hypot(u, v)
			f.Valid[k] = true
			f.U[k], f.V[k], f.Speed[k] = u, v, sp
			f.Cp[k] = 1 - (sp/U)*(sp/U)
			f.Pressure[k] = q2 * f.Cp[k]
		case m.Owner[k] == mesh.LowerWall:
			psi[k] = 0
		case m.Owner[k] == mesh.UpperWall:
			psi[k] = set.Q
		default:
			psi[k] = bodyPsi[int(m.Owner[k])-2]
		}
	}
	sol := &solver.PsiSolution{Sys: &solver.PsiSystem{Mesh: m, BC: set}, Psi: psi, BodyPsi: bodyPsi, Circulation: circ}
	r := &flow.Result{Sol: sol, Fluid: flow.Fluid{Density: rho}, Speed: U, Q: set.Q, Field: f}
	for id := range m.NumBoundaries() {
		s := flow.Surface{Name: m.BoundaryName(id), Boundary: id}
		for _, sp := range m.Sample(id, g.H) {
			if sp.P.X < 0 || sp.P.X > m.Geom.Length {
				continue
			}
			u, v := surfVel(sp.P)
			speed := math.Hypot(u, v)
			vt := u
			if id >= 2 {
				vt = -u*sp.N.Y + v*sp.N.X // along the counter-clockwise tangent (−n_y, n_x)
			}
			cp := 1 - (speed/U)*(speed/U)
			s.Points = append(s.Points, flow.SurfaceValue{SurfacePoint: sp, VT: vt, Speed: speed, Cp: cp, Pressure: q2 * cp})
		}
		r.Surfaces = append(r.Surfaces, s)
	}
	return r
}

// straightChannel returns the geometry of a straight channel with the given bodies.
func straightChannel(t testing.TB, L, H float64, bodies ...mesh.Body) *mesh.Geometry {
	t.Helper()
	lo, err := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: L, Y: 0}}, false, false)
	if err != nil {
		t.Fatal(err)
	}
	up, err := mesh.NewWall([]mesh.Point{{X: 0, Y: H}, {X: L, Y: H}}, false, true)
	if err != nil {
		t.Fatal(err)
	}
	return &mesh.Geometry{Length: L, Lower: lo, Upper: up, Bodies: bodies}
}

// pierFlow is the doublet flow in a 3 m × 1 m channel with a pier of radius 0.12 m at x = 1.2,
// on a grid of spacing h, with its velocity potential.
func pierFlow(t testing.TB, h float64) (*flow.Result, []float64) {
	t.Helper()
	const U, H, L, a = 0.8, 1.0, 3.0, 0.12
	c := mesh.Point{X: 1.2, Y: H / 2}
	geo := straightChannel(t, L, H, mesh.Body{Name: "pier", Shape: mesh.NewCircle(c, a)})
	g, err := mesh.PlanGrid(L, 0, H, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	d := newDoublet(U, H, a, c)
	r := fillResult(t, m, U, 998.2, func(p mesh.Point) float64 { return imag(d.w(p)) }, d.vel, d.vel, []float64{U * H / 2}, []float64{0})
	phi := make([]float64, g.Len())
	ref := real(d.w(mesh.Point{X: L, Y: H / 2}))
	for k := range phi {
		if m.IsFluid(k) {
			phi[k] = real(d.w(g.At(k%g.NX, k/g.NX))) - ref
		}
	}
	return r, phi
}

// joukowski is the flow past a Joukowski section with the Kutta condition (the classical
// conformal map, as in Milne-Thomson or Abbott & von Doenhoff; from memory): the circle
// |ζ − μ| = R through ζ = 1,
// mapped by z = ζ + 1/ζ, in a stream at incidence α, then turned, scaled and placed so that the
// stream runs along +x. Only the surface is exact; the field around it is unbounded flow.
type joukowski struct {
	U, alpha float64
	mu       complex128
	R        float64
	gamma    float64 // in the ζ-plane formula, clockwise positive
	scale    float64
	at       complex128
}

func newJoukowski(U, alpha float64, mu complex128, chord float64, le mesh.Point) joukowski {
	j := joukowski{U: U, alpha: alpha, mu: mu, R: cmplx.Abs(1 - mu)}
	// Kutta: dw/dζ = 0 at the trailing edge ζ = 1.
	e := cmplx.Exp(complex(0, -alpha))
	a := complex(U, 0) * (e - complex(j.R*j.R, 0)/(e*(1-mu)*(1-mu)))
	j.gamma = real(-2 * math.Pi * (1 - mu) * a / complex(0, 1))
	// Chord: from the leading edge (the mapped point of the circle farthest upstream) to z = 2.
	zle := complex(2, 0)
	for k := range 4000 {
		z := j.zeta(float64(k) / 4000 * 2 * math.Pi)
		z = z + 1/z
		if real(z) < real(zle) {
			zle = z
		}
	}
	j.scale = chord / cmplx.Abs(2-zle)
	// Turn by −α about the leading edge so the stream runs along +x.
	j.at = complex(le.X, le.Y) - zle*cmplx.Exp(complex(0, -alpha))*complex(j.scale, 0)
	return j
}

func (j joukowski) zeta(theta float64) complex128 {
	return j.mu + complex(j.R, 0)*cmplx.Exp(complex(0, theta))
}

func (j joukowski) place(z complex128) mesh.Point {
	p := z*cmplx.Exp(complex(0, -j.alpha))*complex(j.scale, 0) + j.at
	return mesh.Point{X: real(p), Y: imag(p)}
}

// outline returns n points of the section, counter-clockwise from the trailing edge.
func (j joukowski) outline(n int) []mesh.Point {
	th0 := cmplx.Phase(1 - j.mu)
	pts := make([]mesh.Point, n)
	for k := range n {
		z := j.zeta(th0 + 2*math.Pi*float64(k)/float64(n))
		pts[k] = j.place(z + 1/z)
	}
	return pts
}

// surfaceVel returns the velocity at the surface point nearest to p.
func (j joukowski) surfaceVel(p mesh.Point) (float64, float64) {
	z := (complex(p.X, p.Y) - j.at) / (cmplx.Exp(complex(0, -j.alpha)) * complex(j.scale, 0))
	sq := cmplx.Sqrt(z*z - 4)
	zeta := (z + sq) / 2
	if alt := (z - sq) / 2; math.Abs(cmplx.Abs(alt-j.mu)-j.R) < math.Abs(cmplx.Abs(zeta-j.mu)-j.R) {
		zeta = alt
	}
	zeta = j.mu + (zeta-j.mu)*complex(j.R/cmplx.Abs(zeta-j.mu), 0)
	e := cmplx.Exp(complex(0, -j.alpha))
	d := zeta - j.mu
	dw := complex(j.U, 0)*(e-complex(j.R*j.R, 0)/(e*d*d)) + complex(0, j.gamma)/(2*math.Pi*d)
	vz := dw / (1 - 1/(zeta*zeta)) // u − iv in the z-plane
	v := cmplx.Conj(vz) * cmplx.Exp(complex(0, -j.alpha))
	return real(v), imag(v)
}

// foilFlow is a Joukowski section of chord 0.3 m at 5° in a 1.5 m × 0.8 m channel. The field
// is a uniform stream (the surface distribution is what its chart shows).
func foilFlow(t testing.TB, h float64) *flow.Result {
	t.Helper()
	const U = 5.0
	j := newJoukowski(U, 5*math.Pi/180, complex(-0.09, 0.08), 0.3, mesh.Point{X: 0.5, Y: 0.4})
	poly, err := mesh.NewPolygon(j.outline(240))
	if err != nil {
		t.Fatal(err)
	}
	geo := straightChannel(t, 1.5, 0.8, mesh.Body{Name: "vane", Shape: poly})
	g, err := mesh.PlanGrid(1.5, 0, 0.8, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	uniform := func(mesh.Point) (float64, float64) { return U, 0 }
	surf := func(p mesh.Point) (float64, float64) {
		if p.Y <= 0 || p.Y >= 0.8 {
			return U, 0 // the walls
		}
		return j.surfaceVel(p)
	}
	circ := -j.gamma * j.scale // counter-clockwise positive
	return fillResult(t, m, U, 1.2, func(p mesh.Point) float64 { return U * p.Y }, uniform, surf, []float64{0.4 * U}, []float64{circ})
}

// solvedFlow runs the real pipeline on geometry geo at spacing h.
func solvedFlow(t testing.TB, geo *mesh.Geometry, U, rho, h float64) *flow.Result {
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
	set, err := bc.New(m, U, make([]bc.Body, len(geo.Bodies)))
	if err != nil {
		t.Fatal(err)
	}
	sys, err := solver.AssemblePsi(m, set)
	if err != nil {
		t.Fatal(err)
	}
	sol, err := solver.SolvePsi(context.Background(), sys, "auto", nil)
	if err != nil {
		t.Fatal(err)
	}
	r, err := flow.Derive(sol, flow.Fluid{Density: rho})
	if err != nil {
		t.Fatal(err)
	}
	return r
}

// contractionGeometry is a sudden contraction (a step in the upper wall at x = 2, smoothed
// runs either side) with a cambered vane and a rounded strut downstream of it.
func contractionGeometry(t testing.TB) *mesh.Geometry {
	t.Helper()
	lo, err := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: 6, Y: 0}}, true, false)
	if err != nil {
		t.Fatal(err)
	}
	up, err := mesh.NewWall([]mesh.Point{{X: 0, Y: 1}, {X: 2, Y: 1}, {X: 2, Y: 0.6}, {X: 6, Y: 0.6}}, true, true)
	if err != nil {
		t.Fatal(err)
	}
	vane, err := mesh.NACA4("2412", 0.3, mesh.Point{X: 3, Y: 0.3}, 4*math.Pi/180, 60)
	if err != nil {
		t.Fatal(err)
	}
	strut, err := mesh.NewRectangle(mesh.Point{X: 4.5, Y: 0.3}, 0.2, 0.05, 10*math.Pi/180, 0.01)
	if err != nil {
		t.Fatal(err)
	}
	return &mesh.Geometry{Length: 6, Lower: lo, Upper: up, Bodies: []mesh.Body{{Name: "vane", Shape: vane}, {Name: "strut", Shape: strut}}}
}

package flow

import (
	"context"
	"math"
	"reflect"
	"runtime"
	"slices"
	"strings"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
	"phipsi/solver"
)

// crRun is one ψ and φ solution of a channel scenario.
type crRun struct {
	mesh *mesh.Mesh
	res  *Result
	phi  *solver.PhiSolution
}

// crSolve builds the channel between the given walls with the given bodies at spacing h, solves
// ψ and then φ with ψ's circulations, as a run does.
func crSolve(t *testing.T, length float64, lower, upper []mesh.Point, smooth bool, h, u float64, bodies []mesh.Body, conds []bc.Body) crRun {
	t.Helper()
	lw, err := mesh.NewWall(lower, smooth, false)
	if err != nil {
		t.Fatal(err)
	}
	uw, err := mesh.NewWall(upper, smooth, true)
	if err != nil {
		t.Fatal(err)
	}
	geo := &mesh.Geometry{Length: length, Lower: lw, Upper: uw, Bodies: bodies}
	ylo, _ := lw.Extent()
	_, yhi := uw.Extent()
	g, err := mesh.PlanGrid(length, ylo, yhi, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	if conds == nil {
		conds = make([]bc.Body, len(bodies))
	}
	set, err := bc.New(m, u, conds)
	if err != nil {
		t.Fatal(err)
	}
	ctx := context.Background()
	psys, err := solver.AssemblePsi(m, set)
	if err != nil {
		t.Fatal(err)
	}
	psol, err := solver.SolvePsi(ctx, psys, solver.MethodAuto, nil)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Derive(psol, Fluid{Density: 1000})
	if err != nil {
		t.Fatal(err)
	}
	fsys, err := solver.AssemblePhi(m, set, psol.Circulation, nil)
	if err != nil {
		t.Fatal(err)
	}
	fsol, err := solver.SolvePhi(ctx, fsys, solver.MethodAuto, nil)
	if err != nil {
		t.Fatal(err)
	}
	return crRun{m, res, fsol}
}

func wall(pts ...float64) []mesh.Point {
	var out []mesh.Point
	for q := 0; q+1 < len(pts); q += 2 {
		out = append(out, mesh.Point{X: pts[q], Y: pts[q+1]})
	}
	return out
}

// TestMismatchUniformChannel checks that ψ and φ give the same uniform flow in an empty
// channel: both solutions are exact there (ψ = U(y − y₀), φ = U(x − L)).
func TestMismatchUniformChannel(t *testing.T) {
	// tol is the mismatch the solves' relative residual of 1e-10 allows.
	const tol = 1e-8
	r := crSolve(t, 2, wall(0, 0, 2, 0), wall(0, 0.5, 2, 0.5), false, 0.05, 1.7, nil, nil)
	mm, err := Mismatch(r.res, r.phi)
	if err != nil {
		t.Fatal(err)
	}
	if mm > tol {
		t.Errorf("mismatch %.3g, want ≤ %g", mm, tol)
	}
}

// TestMismatch checks the Cauchy–Riemann relations u = ∂φ/∂x = ∂ψ/∂y, v = ∂φ/∂y = −∂ψ/∂x of the
// complex potential w = φ + iψ (Milne-Thomson, Theoretical Hydrodynamics, ch. 4, chapter from
// memory) between the two independent solutions, over nodes at least 2H from every boundary, at
// the resolutions and bounds the φ issue sets: 1 % at 40 cells per diameter for a cylinder in a
// channel (d/H = 0.3; inlet and outlet 2.5 channel heights away, REFERENCES.md item 2) and for a
// smooth contraction (40 cells across its throat), 2 % for lifting cases with a given
// circulation, one with its cut ending on a wall.
func TestMismatch(t *testing.T) {
	const (
		d = 0.3  // cylinder diameter, m
		u = 0.8  // inflow speed, m/s
		n = 40.0 // cells per diameter (or across the throat)
	)
	centre := mesh.Point{X: 2.5 + 0.01*math.Sqrt2, Y: 0.5 + 0.003*math.Sqrt(3)}
	cyl := []mesh.Body{{Name: "pier", Shape: mesh.NewCircle(centre, d/2)}}
	// A circulation of −2πaU puts the stagnation points at −30° and −150° (sin θ_s = Γ/(4πUa),
	// REFERENCES.md item 1): a strongly lifting case with the flow still attached to the body.
	lift := []bc.Body{{Circulation: -2 * math.Pi * (d / 2) * u}}
	tests := []struct {
		name         string
		lower, upper []mesh.Point
		smooth       bool
		h            float64
		bodies       []mesh.Body
		conds        []bc.Body
		max          float64
		cutToOutlet  bool
	}{
		{"cylinder in a channel", wall(0, 0, 5, 0), wall(0, 1, 5, 1), false, d / n, cyl, nil, 0.01, false},
		{"smooth contraction", wall(0, 0, 6, 0), wall(0, 1, 2, 1, 3, 0.5, 6, 0.5), true, 0.5 / n, nil, nil, 0.01, false},
		{"lifting cylinder", wall(0, 0, 5, 0), wall(0, 1, 5, 1), false, d / n, cyl, lift, 0.02, true},
		{"lifting cylinder, cut ending on a wall", wall(0, 0, 5, 0), wall(0, 1, 2.9, 1, 3.9, 0.45, 5, 0.45), true, d / n, cyl, lift, 0.02, false},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			r := crSolve(t, tt.upper[len(tt.upper)-1].X, tt.lower, tt.upper, tt.smooth, tt.h, u, tt.bodies, tt.conds)
			mm, err := Mismatch(r.res, r.phi)
			if err != nil {
				t.Fatal(err)
			}
			cuts := r.phi.Sys.Cuts
			t.Logf("%d nodes: mismatch %.3f %%, φ by CG in %d iterations, cuts %+v", r.mesh.Len(), 100*mm, r.phi.Stats.Iterations, cuts)
			if mm > tt.max {
				t.Errorf("mismatch %.3f %%, want ≤ %g %%", 100*mm, 100*tt.max)
			}
			if tt.conds != nil {
				if len(cuts) != 1 || cuts[0].ToOutlet != tt.cutToOutlet {
					t.Errorf("cuts %+v, want one that ends at the outlet: %v", cuts, tt.cutToOutlet)
				}
			}
		})
	}
}

// TestPhiVelocityThinPlate checks that a plate thinner than a cell, which splits the dual cells
// it runs through, lets no flux leak through it: with a circulation the speeds above and below
// its middle differ by about 18 %, and φ's speeds there must match ψ's, which any leak through
// the split cells would pull towards each other.
func TestPhiVelocityThinPlate(t *testing.T) {
	// tol is the agreement required at the probed nodes, relative to U; measured 0.08 %.
	const tol = 0.002
	const h = 0.01
	plate, err := mesh.NewRectangle(mesh.Point{X: 2.5, Y: 0.5 + 0.2*h}, 1.0, 0.3*h, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	r := crSolve(t, 5, wall(0, 0, 5, 0), wall(0, 1, 5, 1), false, h, 0.8, []mesh.Body{{Name: "plate", Shape: plate}}, []bc.Body{{Circulation: -0.2}})
	g := r.mesh.Grid
	split := 0
	for k := range g.Len() {
		if r.phi.Sys.Faces.Pieces(k) > 1 {
			split++
		}
	}
	if split < 50 {
		t.Fatalf("%d split cells, want the plate to split about 100", split)
	}
	pf := PhiVelocity(r.phi, r.res.Fluid)
	i := int(math.Round(2.5 / g.H))
	jp := int(math.Round(0.5 / g.H))
	var speeds []float64
	for _, j := range []int{jp - 2, jp + 2} {
		k := g.Index(i, j)
		sp := r.res.Field.Speed[k]
		speeds = append(speeds, sp)
		if d := math.Hypot(pf.U[k]-r.res.Field.U[k], pf.V[k]-r.res.Field.V[k]) / 0.8; d > tol {
			t.Errorf("at (%g, %g): φ gives (%.5f, %.5f), ψ (%.5f, %.5f): mismatch %.3g, want ≤ %g", g.X(i), g.Y(j), pf.U[k], pf.V[k], r.res.Field.U[k], r.res.Field.V[k], d, tol)
		}
	}
	if speeds[1]-speeds[0] < 0.1*0.8 {
		t.Errorf("speeds below and above the plate %.4f and %.4f: the circulation should separate them by about 18 %% of U", speeds[0], speeds[1])
	}
}

// TestMismatchErrors checks that Mismatch refuses φ from another grid and a channel too narrow
// to have nodes 2H from its walls.
func TestMismatchErrors(t *testing.T) {
	a := crSolve(t, 1, wall(0, 0, 1, 0), wall(0, 0.5, 1, 0.5), false, 0.05, 1, nil, nil)
	b := crSolve(t, 1, wall(0, 0, 1, 0), wall(0, 0.5, 1, 0.5), false, 0.025, 1, nil, nil)
	if _, err := Mismatch(a.res, b.phi); err == nil || !strings.Contains(err.Error(), "grid") {
		t.Errorf("mismatched grids: error %v, want one about the grid", err)
	}
	narrow := crSolve(t, 1, wall(0, 0, 1, 0), wall(0, 0.15, 1, 0.15), false, 0.05, 1, nil, nil)
	if _, err := Mismatch(narrow.res, narrow.phi); err == nil || !strings.Contains(err.Error(), "spacings") {
		t.Errorf("narrow channel: error %v, want one about nodes too near the boundaries", err)
	}
}

// TestMismatchFoil runs the Cauchy–Riemann check on a NACA 0012 section at 5° with about the
// circulation thin-airfoil theory gives it (Γ = −πUcα(1 + 0.77 t/c); REFERENCES.md item 6, the
// thickness factor from memory), its cut starting at the sharp trailing edge through cells the
// thin edge splits. Unless Γ is exactly the Kutta value the velocity is singular at the edge
// (V ~ r^(−1/2)), so two spacings from it neither field's difference quotients converge and the
// 2H figure is only logged; eight spacings away the check is a discretisation check again, where
// a flux leak through the thin edge or a misplaced jump would show.
func TestMismatchFoil(t *testing.T) {
	// tol is the bound 8H from every boundary; measured 0.37 % at 50 cells per chord.
	const tol = 0.01
	const (
		chord = 0.4
		u     = 0.8
		alpha = 5 * math.Pi / 180
	)
	foil, err := mesh.NACA4("0012", chord, mesh.Point{X: 2.3, Y: 0.5 + 0.003*math.Sqrt(3)}, alpha, 100)
	if err != nil {
		t.Fatal(err)
	}
	gam := -math.Pi * u * chord * alpha * (1 + 0.77*0.12)
	r := crSolve(t, 5, wall(0, 0, 5, 0), wall(0, 1, 5, 1), false, chord/50, u, []mesh.Body{{Name: "foil", Shape: foil}}, []bc.Body{{Circulation: gam}})
	mm, err := Mismatch(r.res, r.phi)
	if err != nil {
		t.Fatal(err)
	}
	pf := PhiVelocity(r.phi, r.res.Fluid)
	away := awayFromBoundaries(r.mesh, 8)
	far := 0.0
	for k, ok := range away {
		if ok {
			far = math.Max(far, math.Hypot(pf.U[k]-r.res.Field.U[k], pf.V[k]-r.res.Field.V[k])/u)
		}
	}
	t.Logf("mismatch %.3f %% at 2H, %.3f %% at 8H; cuts %+v; %d CG iterations", 100*mm, 100*far, r.phi.Sys.Cuts, r.phi.Stats.Iterations)
	if len(r.phi.Sys.Cuts) != 1 {
		t.Fatalf("%d cuts, want 1", len(r.phi.Sys.Cuts))
	}
	if far > tol {
		t.Errorf("mismatch 8H from the boundaries %.3f %%, want ≤ %g %%", 100*far, 100*tol)
	}
}

// TestVelocityFastSameBits checks that the mismatch's direct central differences give the bits of
// the general φ velocity at every node they are used for, on a lifting foil whose branch cut
// crosses the grid (so that the rows and columns beside the cut take the general path).
func TestVelocityFastSameBits(t *testing.T) {
	foil, err := mesh.NACA4("2412", 0.4, mesh.Point{X: 1.6, Y: 0.52}, 4*math.Pi/180, 100)
	if err != nil {
		t.Fatal(err)
	}
	r := crSolve(t, 4, wall(0, 0, 4, 0), wall(0, 1, 4, 1), false, 0.02, 1, []mesh.Body{{Name: "foil", Shape: foil}}, []bc.Body{{Kutta: true}})
	if len(r.phi.Sys.Cuts) != 1 {
		t.Fatalf("%d cuts, want 1", len(r.phi.Sys.Cuts))
	}
	c := r.phi.Sys.Cuts[0]
	g := r.mesh.Grid
	pn := phiNodes{sol: r.phi, g: g}
	fast := 0
	for j := range g.NY {
		for i := range g.NX {
			uncut := j != c.Row && j != c.Row+1 && i != c.Col && i != c.Col+1
			u, v, ok := pn.velocity(i, j)
			fu, fv, fok := pn.velocityFast(i, j, uncut)
			if ok != fok || math.Float64bits(u) != math.Float64bits(fu) || math.Float64bits(v) != math.Float64bits(fv) {
				t.Fatalf("node (%d, %d): fast (%v, %v, %v), general (%v, %v, %v)", i, j, fu, fv, fok, u, v, ok)
			}
			if uncut && ok {
				fast++
			}
		}
	}
	if fast < g.Len()/2 {
		t.Errorf("only %d of %d nodes took the direct path", fast, g.Len())
	}
	// The cut must change φ's differences across it: its row's nodes are not all continuous.
	if c.Circulation == 0 {
		t.Errorf("the Kutta foil has no circulation")
	}
}

// TestSurfacesSameOnAnyThreads checks that the surface values do not depend on the number of
// goroutines that evaluate the boundary samples.
func TestSurfacesSameOnAnyThreads(t *testing.T) {
	foil, err := mesh.NACA4("2412", 0.4, mesh.Point{X: 1.6, Y: 0.52}, 4*math.Pi/180, 100)
	if err != nil {
		t.Fatal(err)
	}
	r := crSolve(t, 4, wall(0, 0, 4, 0), wall(0, 1, 4, 1), false, 0.005, 1, []mesh.Body{{Name: "foil", Shape: foil}}, []bc.Body{{Kutta: true}})
	if n := len(r.res.Surfaces[0].Points); n < 2*surfaceSamplesMin {
		t.Fatalf("%d wall points: too few to share", n)
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		got, err := Derive(r.res.Sol, r.res.Fluid)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(got.Surfaces, r.res.Surfaces) {
			t.Errorf("GOMAXPROCS %d: the surfaces differ", procs)
		}
	}
}

// TestVelocityDirectSameBits checks that the nodes with four whole arms, differenced directly
// (velocityDirect), get the same bits of every field as by the general three-point path, on a
// channel with a cambered foil under the Kutta condition.
func TestVelocityDirectSameBits(t *testing.T) {
	foil, err := mesh.NACA4("2412", 0.4, mesh.Point{X: 1.6, Y: 0.52}, 4*math.Pi/180, 100)
	if err != nil {
		t.Fatal(err)
	}
	r := crSolve(t, 4, wall(0, 0, 4, 0), wall(0, 1, 4, 1), false, 0.02, 1, []mesh.Body{{Name: "foil", Shape: foil}}, []bc.Body{{Kutta: true}})
	fl := Fluid{Density: 1000, Pressure: 1e5}
	direct := velocityField(r.res.Sol, fl)
	velocityDirect = false
	defer func() { velocityDirect = true }()
	general := velocityField(r.res.Sol, fl)
	same := func(a, b []float64) bool {
		return slices.EqualFunc(a, b, func(x, y float64) bool { return math.Float64bits(x) == math.Float64bits(y) })
	}
	if !slices.Equal(direct.Valid, general.Valid) || !same(direct.U, general.U) || !same(direct.V, general.V) ||
		!same(direct.Speed, general.Speed) || !same(direct.Cp, general.Cp) || !same(direct.Pressure, general.Pressure) {
		t.Error("the fields differ from the general path's")
	}
	if len(r.mesh.Cuts) == 0 {
		t.Fatal("no cut node: the general path is not exercised")
	}
}

// awayReference is awayFromBoundaries written plainly: every node's test first, then every
// sample's neighbourhood on one goroutine, with the distances as Point differences.
func awayReference(m *mesh.Mesh, dist float64) []bool {
	g := m.Grid
	h := g.H
	r := dist * h
	away := make([]bool, g.Len())
	x0, x1 := g.X0+r, g.X(g.NX-1)-r
	var samples []mesh.SurfacePoint
	for id := range m.NumBoundaries() {
		samples = append(samples, m.Sample(id, h/16)...)
	}
	r2 := r * (1 - 1e-9) * r * (1 - 1e-9)
	for k := 0; k < g.Len(); k++ {
		x := g.X(k % g.NX)
		away[k] = m.IsFluid(k) && x >= x0-1e-9*h && x <= x1+1e-9*h
	}
	for _, sp := range samples {
		p := sp.P
		j0 := max(0, int(math.Floor((p.Y-r-g.Y0)/h)))
		j1 := min(g.NY-1, int(math.Ceil((p.Y+r-g.Y0)/h)))
		i0 := max(0, int(math.Floor((p.X-r-g.X0)/h)))
		i1 := min(g.NX-1, int(math.Ceil((p.X+r-g.X0)/h)))
		for j := j0; j <= j1; j++ {
			for i := i0; i <= i1; i++ {
				if d := g.At(i, j).Sub(p); d.X*d.X+d.Y*d.Y < r2 {
					away[g.Index(i, j)] = false
				}
			}
		}
	}
	return away
}

// TestAwayFromBoundariesSame checks the mask of nodes away from every boundary against
// awayReference, on a channel with a bumped smooth wall, a circle and a foil, at two sizes (the
// larger one shared among goroutines).
func TestAwayFromBoundariesSame(t *testing.T) {
	for _, cells := range []float64{2e4, 3e5} {
		lw, _ := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: 2, Y: 0.1}, {X: 6, Y: 0}}, true, false)
		uw, _ := mesh.NewWall([]mesh.Point{{X: 0, Y: 1}, {X: 6, Y: 1}}, false, true)
		g, _ := mesh.PlanGrid(6, 0, 1, 1/math.Sqrt(cells/6))
		foil, _ := mesh.NACA4("2412", 0.5, mesh.Point{X: 3, Y: 0.5}, 0.1, 80)
		m, err := mesh.Build(&mesh.Geometry{Length: 6, Lower: lw, Upper: uw, Bodies: []mesh.Body{{Name: "c", Shape: mesh.NewCircle(mesh.Point{X: 1.5, Y: 0.5}, 0.1)}, {Name: "f", Shape: foil}}}, g)
		if err != nil {
			t.Fatal(err)
		}
		a, b := awayFromBoundaries(m, MismatchDistance), awayReference(m, MismatchDistance)
		n := 0
		for k := range a {
			if a[k] != b[k] {
				t.Fatalf("%g cells: node (%d, %d): away %v, want %v", cells, k%g.NX, k/g.NX, a[k], b[k])
			}
			if a[k] {
				n++
			}
		}
		if n == 0 || n == len(a) {
			t.Errorf("%g cells: %d of %d nodes away: the case tests nothing", cells, n, len(a))
		}
	}
}

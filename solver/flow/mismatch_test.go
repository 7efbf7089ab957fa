package flow

import (
	"context"
	"math"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
	"phipsi/solver"
)

// mismatchRun solves ψ and φ on a channel with the given walls and bodies and returns the
// Cauchy–Riemann mismatch and the φ solve's statistics.
func mismatchRun(t *testing.T, length float64, lower, upper []mesh.Point, smooth bool, h, u float64, bodies []mesh.Body, conds []bc.Body) (float64, solver.Stats) {
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
	psol, err := solver.SolvePsi(ctx, psys, "auto", nil)
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
	fsol, err := solver.SolvePhi(ctx, fsys, "auto", nil)
	if err != nil {
		t.Fatal(err)
	}
	mm, err := Mismatch(res, fsol)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("nodes %d, unknowns %d, circulation %v, cuts %+v", m.Len(), len(fsys.Nodes), psol.Circulation, fsys.Cuts)
	return mm, fsol.Stats
}

func TestMismatchExploratory(t *testing.T) {
	straight := func(y, l float64) []mesh.Point { return []mesh.Point{{X: 0, Y: y}, {X: l, Y: y}} }
	for _, n := range []int{20, 40, 80} {
		d := 0.3
		h := d / float64(n)
		cyl := []mesh.Body{{Name: "pier", Shape: mesh.NewCircle(mesh.Point{X: 2.5 + 0.01*math.Sqrt2, Y: 0.5 + 0.003*math.Sqrt(3)}, d/2)}}
		mm, st := mismatchRun(t, 5, straight(0, 5), straight(1, 5), false, h, 0.8, cyl, nil)
		t.Logf("cylinder D/h=%d mismatch %.4g%% iters %d", n, 100*mm, st.Iterations)
		mm, st = mismatchRun(t, 5, straight(0, 5), straight(1, 5), false, h, 0.8, cyl, []bc.Body{{Circulation: -2 * math.Pi * d / 2 * 0.8}})
		t.Logf("lifting cylinder D/h=%d mismatch %.4g%% iters %d", n, 100*mm, st.Iterations)
		hc := 0.5 / float64(n)
		mm, st = mismatchRun(t, 6, straight(0, 6), []mesh.Point{{X: 0, Y: 1}, {X: 2, Y: 1}, {X: 3, Y: 0.5}, {X: 6, Y: 0.5}}, true, hc, 0.8, nil, nil)
		t.Logf("contraction cells across throat=%d mismatch %.4g%% iters %d", n, 100*mm, st.Iterations)
	}
}

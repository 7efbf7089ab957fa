package flow

import (
	"context"
	"math"
	"testing"

	"phipsi/bc"
	"phipsi/mesh"
	"phipsi/solver"
)

func TestExploreFoil(t *testing.T) {
	for _, n := range []int{50} {
		c := 0.4
		h := c / float64(n)
		foil, err := mesh.NACA4("0012", c, mesh.Point{X: 2.3, Y: 0.5 + 0.003*math.Sqrt(3)}, 5*math.Pi/180, 100)
		if err != nil {
			t.Fatal(err)
		}
		gam := -2 * math.Pi * 5 * math.Pi / 180 * (1 + 0.77*0.12) * 0.8 * c / 2
		lw, _ := mesh.NewWall([]mesh.Point{{X: 0, Y: 0}, {X: 5, Y: 0}}, false, false)
		uw, _ := mesh.NewWall([]mesh.Point{{X: 0, Y: 1}, {X: 5, Y: 1}}, false, true)
		geo := &mesh.Geometry{Length: 5, Lower: lw, Upper: uw, Bodies: []mesh.Body{{Name: "foil", Shape: foil}}}
		g, _ := mesh.PlanGrid(5, 0, 1, h)
		m, _ := mesh.Build(geo, g)
		set, err := bc.New(m, 0.8, []bc.Body{{Circulation: gam}})
		if err != nil {
			t.Fatal(err)
		}
		ctx := context.Background()
		psys, _ := solver.AssemblePsi(m, set)
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
		pf := PhiVelocity(fsol, res.Fluid)
		away := awayFromBoundaries(m, 2)
		worst, at := 0.0, 0
		split := 0
		for k := range m.Len() {
			if fsys.Faces.Pieces(k) > 1 {
				split++
			}
			if !away[k] {
				continue
			}
			d := math.Hypot(pf.U[k]-res.Field.U[k], pf.V[k]-res.Field.V[k]) / res.Speed
			if d > worst {
				worst, at = d, k
			}
		}
		for _, dd := range []float64{2, 4, 8, 16} {
			aw := awayFromBoundaries(m, dd)
			w, wk := 0.0, 0
			for k := range m.Len() {
				if !aw[k] {
					continue
				}
				d := math.Hypot(pf.U[k]-res.Field.U[k], pf.V[k]-res.Field.V[k]) / res.Speed
				if d > w {
					w, wk = d, k
				}
			}
			t.Logf("  dist %gH: %.4g%% at (%.4f, %.4f)", dd, 100*w, g.X(wk%g.NX), g.Y(wk/g.NX))
		}
		te := foil.Corners()
		t.Logf("n=%d gam=%g measured %v cuts %+v split cells %d iso %d", n, gam, psol.Circulation, fsys.Cuts, split, fsys.Isolated)
		t.Logf("worst %.4g%% at (%g, %g) TE corners %v iters %d", 100*worst, g.X(at%g.NX), g.Y(at/g.NX), te[0].P, fsol.Stats.Iterations)
	}
}

package render

import (
	"bytes"
	"image/color"
	"image/png"
	"math"
	"testing"

	"phipsi/mesh"
)

// TestShadeNoSpeckle: on a coarse grid around a body, every pixel whose centre is in the fluid
// gets a colour of the map (no gap, no value leaked from a node inside the body), and every
// pixel well inside the body is covered by the body's solid colour once it is drawn.
func TestShadeNoSpeckle(t *testing.T) {
	if err := parseFonts(); err != nil {
		t.Fatal(err)
	}
	r, _ := pierFlow(t, 0.05) // 60 × 20 cells: speckle would be plain to see
	sc := newScene(r, nil, 900, "")
	p := sc.newFieldPic()
	cm := newColormap(&speedTable, 0, 2.5, 0)
	sc.shade(p, r.Field.Speed, 1/r.Speed, cm)
	inMap := make(map[color.RGBA]bool)
	for _, c := range cm.rgba {
		inMap[c] = true
	}
	fr := &p.fr
	bad := 0
	for y := int(fr.top) + 1; y < int(fr.top+fr.height)-1; y++ {
		for x := int(fr.left) + 1; x < int(fr.left+fr.width)-1; x++ {
			w := fr.world(float64(x)+0.5, float64(y)+0.5)
			if !sc.m.Geom.InFluid(w) {
				continue
			}
			if !inMap[p.img.RGBAAt(x, y)] {
				bad++
			}
		}
	}
	if bad != 0 {
		t.Errorf("%d fluid pixels without a map colour, want 0", bad)
	}
	// The solid drawing covers the body: pixels more than 2 px inside it are the body colour.
	sc.drawSolids(p.canvas, fr)
	c := mesh.Point{X: 1.2, Y: 0.5}
	inner := 0.12 - 2/fr.scale
	covered, total := 0, 0
	for y := int(fr.top); y < int(fr.top+fr.height); y++ {
		for x := int(fr.left); x < int(fr.left+fr.width); x++ {
			if fr.world(float64(x)+0.5, float64(y)+0.5).Sub(c).Norm() < inner {
				total++
				if p.img.RGBAAt(x, y) == bodyColour {
					covered++
				}
			}
		}
	}
	if total == 0 || covered != total {
		t.Errorf("body interior: %d of %d pixels in the body colour, want all", covered, total)
	}
}

// TestAdverseStretches: behind a pier the wall pressure recovers (rises downstream) from the
// station of the pier on; upstream it falls. A straight empty channel has none.
func TestAdverseStretches(t *testing.T) {
	if err := parseFonts(); err != nil {
		t.Fatal(err)
	}
	r, _ := pierFlow(t, 0.01)
	sc := newScene(r, nil, 800, "")
	const xc = 1.2 // the pier's station, where the wall Cp is lowest (the flow is symmetric)
	for id := range 2 {
		st := sc.adverseStretches(&r.Surfaces[id])
		if len(st) != 1 {
			t.Fatalf("wall %d: got %d adverse stretches %v, want 1", id, len(st), st)
		}
		// The stretch starts where the gradient passes the threshold, a little behind the
		// minimum, and runs well downstream.
		if s := st[0]; s[0] < xc || s[0] > xc+0.15 || s[1] < xc+0.5 {
			t.Errorf("wall %d: stretch %v, want a start in [%g, %g] and an end beyond %g", id, s, xc, xc+0.15, xc+0.5)
		}
	}
	// Uniform flow: Cp = 0 everywhere.
	geo := straightChannel(t, 3, 1)
	g, err := mesh.PlanGrid(3, 0, 1, 0.05)
	if err != nil {
		t.Fatal(err)
	}
	m, err := mesh.Build(geo, g)
	if err != nil {
		t.Fatal(err)
	}
	uniform := func(mesh.Point) (float64, float64) { return 1, 0 }
	ru := fillResult(t, m, 1, 1000, func(p mesh.Point) float64 { return p.Y }, uniform, uniform, nil, nil)
	su := newScene(ru, nil, 800, "")
	for id := range 2 {
		if st := su.adverseStretches(&ru.Surfaces[id]); len(st) != 0 {
			t.Errorf("uniform flow, wall %d: got stretches %v, want none", id, st)
		}
	}
}

// TestBodyFrame checks how bodies are charted: round and stubby bodies against the angle from
// the front stagnation point, slender ones against x/chord with the trailing edge at a sharp
// corner.
func TestBodyFrame(t *testing.T) {
	const U = 1.0
	uniform := func(mesh.Point) (float64, float64) { return U, 0 }
	build := func(s mesh.Shape) *scene {
		geo := straightChannel(t, 2, 1, mesh.Body{Name: "b", Shape: s})
		g, err := mesh.PlanGrid(2, 0, 1, 0.01)
		if err != nil {
			t.Fatal(err)
		}
		m, err := mesh.Build(geo, g)
		if err != nil {
			t.Fatal(err)
		}
		r := fillResult(t, m, U, 1000, func(p mesh.Point) float64 { return p.Y }, uniform, uniform, []float64{0.5}, []float64{0})
		return newScene(r, nil, 800, "")
	}
	c := mesh.Point{X: 1, Y: 0.5}
	naca, err := mesh.NACA4("0012", 0.4, mesh.Point{X: 0.8, Y: 0.5}, 3*math.Pi/180, 60)
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		name  string
		shape mesh.Shape
		foil  bool
		chord float64 // foil: expected chord, m
	}{
		{"circle", mesh.NewCircle(c, 0.1), false, 0},
		{"2:1 ellipse", mesh.NewEllipse(c, 0.2, 0.1, 0), false, 0},
		{"4:1 ellipse", mesh.NewEllipse(c, 0.2, 0.05, 0.1), true, 0.4},
		{"NACA 0012", naca, true, 0.4},
	}
	// chordTol: the chord ends are outline samples; the section's own trailing edge is a vertex.
	const chordTol = 0.01
	for _, tc := range cases {
		t.Run(tc.name, func(t *testing.T) {
			bf := build(tc.shape).newBodyFrame(0)
			if bf.foil != tc.foil {
				t.Fatalf("foil = %v, want %v", bf.foil, tc.foil)
			}
			if !tc.foil {
				// The top of a round body is 90° from the front, over the upper side.
				top := mesh.Point{X: bf.centre.X, Y: bf.centre.Y + 0.1}
				if got := bf.param(top); math.Abs(got-90) > 1 {
					t.Errorf("angle of the top: got %g°, want 90° (±1°)", got)
				}
				return
			}
			if math.Abs(bf.chord-tc.chord) > chordTol*tc.chord {
				t.Errorf("chord: got %g, want %g", bf.chord, tc.chord)
			}
			if got := bf.param(bf.te); math.Abs(got-1) > 1e-12 {
				t.Errorf("x/c of the trailing edge: got %g, want 1", got)
			}
			if bf.te.X < bf.le.X {
				t.Errorf("trailing edge %v is upstream of the leading edge %v", bf.te, bf.le)
			}
		})
	}
	t.Run("NACA trailing edge at its vertex", func(t *testing.T) {
		bf := build(naca).newBodyFrame(0)
		// The section's trailing edge (x = 1 of the formula) is its sharpest corner.
		want := naca.Pts[60]
		if d := bf.te.Sub(want).Norm(); d > 1e-12 {
			t.Errorf("trailing edge at %v, want the vertex %v", bf.te, want)
		}
	})
}

// TestSides: the upper and lower surfaces of a foil split at the edges and keep outline order,
// and together hold every sample (the two edges in both).
func TestSides(t *testing.T) {
	r := foilFlow(t, 0.005)
	sc := newScene(r, nil, 800, "")
	bf := sc.newBodyFrame(0)
	pts := r.Surfaces[2].Points
	up, lo := bf.sides(pts)
	if len(up)+len(lo) != len(pts)+2 {
		t.Errorf("got %d + %d samples, want %d + 2", len(up), len(lo), len(pts))
	}
	// At every station along the chord the upper surface lies above the lower one.
	d := bf.te.Sub(bf.le)
	height := func(p mesh.Point) float64 { return d.Cross(p.Sub(bf.le)) / d.Norm() }
	for _, p := range up {
		x := bf.param(p.P)
		if x < 0.05 || x > 0.95 {
			continue
		}
		best, q := math.Inf(1), mesh.Point{}
		for _, l := range lo {
			if dx := math.Abs(bf.param(l.P) - x); dx < best {
				best, q = dx, l.P
			}
		}
		if height(p.P) <= height(q) {
			t.Errorf("at x/c = %.3f the upper surface (%.4f) is not above the lower (%.4f)", x, height(p.P), height(q))
			break
		}
	}
}

// TestPipeline renders every image of a solved flow (the real solver on a small contraction
// with a vane and a strut) and checks what must hold in any such picture: every image decodes
// at the asked width, the walls and bodies are drawn solid.
func TestPipeline(t *testing.T) {
	if testing.Short() {
		t.Skip("solves a 15 000-cell flow")
	}
	r := solvedFlow(t, contractionGeometry(t), 12, 1.204, 0.02)
	imgs, err := Render(r, nil, Options{Width: 900, Title: "Contraction"})
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"streamlines", "speed", "pressure", "walls", "surface-vane", "surface-strut"}
	if got := names(imgs); len(got) != len(want) {
		t.Fatalf("got images %v, want %v", got, want)
	}
	if err := parseFonts(); err != nil {
		t.Fatal(err)
	}
	fr := newScene(r, nil, 900, "").newFieldPic().fr
	for _, im := range imgs {
		img, err := png.Decode(bytes.NewReader(im.PNG))
		if err != nil {
			t.Fatalf("%s: %v", im.Name, err)
		}
		if w := img.Bounds().Dx(); w != 900 {
			t.Errorf("%s: width %d, want 900", im.Name, w)
		}
		if im.Name != "streamlines" && im.Name != "speed" && im.Name != "pressure" {
			continue
		}
		// Inside the step (x = 4, y = 0.8 is beyond the upper wall) the wall colour; in the
		// middle of the strut the body colour.
		for _, probe := range []struct {
			at   mesh.Point
			want color.RGBA
		}{{mesh.Point{X: 4, Y: 0.8}, wallColour}, {mesh.Point{X: 4.5, Y: 0.3}, bodyColour}} {
			x, y := fr.px(probe.at)
			got := color.RGBAModel.Convert(img.At(int(x), int(y))).(color.RGBA)
			if got != probe.want {
				t.Errorf("%s at %v: got %v, want %v", im.Name, probe.at, got, probe.want)
			}
		}
	}
}

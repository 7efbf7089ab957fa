package mesh

import (
	"math"
	"runtime"
	"slices"
	"strings"
	"testing"
)

// facesMesh builds the mesh of a channel from x = 0 to length with the given walls and bodies
// on a grid of spacing h whose rows cover y from ylo to yhi.
func facesMesh(t *testing.T, length float64, lower, upper []Point, smooth bool, ylo, yhi, h float64, bodies ...Body) *Mesh {
	t.Helper()
	lw, err := NewWall(lower, smooth, false)
	if err != nil {
		t.Fatal(err)
	}
	uw, err := NewWall(upper, smooth, true)
	if err != nil {
		t.Fatal(err)
	}
	g, err := PlanGrid(length, ylo, yhi, h)
	if err != nil {
		t.Fatal(err)
	}
	m, err := Build(&Geometry{Length: length, Lower: lw, Upper: uw, Bodies: bodies}, g)
	if err != nil {
		t.Fatal(err)
	}
	return m
}

func flat(y, length float64) []Point { return []Point{{0, y}, {length, y}} }

// overlap returns the length of [a, b] ∩ [c, d].
func overlap(a, b, c, d float64) float64 { return math.Max(0, math.Min(b, d)-math.Max(a, c)) }

// TestFacesExactFractions compares the open length of every face with the exact value for
// geometries where it has a closed form: straight walls off the grid rows (the fluid stretch of
// each face is its overlap with the channel) and a circle (the solid stretch of a face on the
// line x = c is its overlap with |y − y₀| ≤ √(a² − (c − x₀)²), and likewise for rows).
func TestFacesExactFractions(t *testing.T) {
	// exactTol is the agreement required, as a fraction of H: the crossings are analytic roots,
	// accurate to a few ulps of the coordinates.
	const exactTol = 1e-12
	const (
		length = 1.3
		lo, hi = 0.0137, 0.6071
		h      = 0.02
	)
	c := Point{0.61 + 0.003*math.Sqrt2, 0.31 + 0.002*math.Sqrt(3)}
	const a = 0.1234
	m := facesMesh(t, length, flat(lo, length), flat(hi, length), false, lo-0.5*h, hi, h, Body{"c", NewCircle(c, a)})
	f, err := NewFaces(m)
	if err != nil {
		t.Fatal(err)
	}
	g := m.Grid
	// solid returns the solid length of [s0, s1] on the line x = x (vertical) or y = y.
	circleSolid := func(vertical bool, line, s0, s1 float64) float64 {
		d := line - c.X
		mid := c.Y
		if !vertical {
			d, mid = line-c.Y, c.X
		}
		if math.Abs(d) >= a {
			return 0
		}
		half := math.Sqrt(a*a - d*d)
		return overlap(s0, s1, mid-half, mid+half)
	}
	checked := 0
	for face := range f.NumFaces() {
		k := face / 2
		if face < 2*g.Len() && ((face%2 == 0 && k%g.NX == g.NX-1) || (face%2 == 1 && k/g.NX == g.NY-1)) {
			if got := f.Open(face); got != 0 {
				t.Fatalf("face %d beyond the grid: open %g, want 0", face, got)
			}
			continue
		}
		pa, pb := f.Segment(face)
		var want float64
		if pa.X == pb.X {
			want = overlap(pa.Y, pb.Y, lo, hi) - circleSolid(true, pa.X, pa.Y, pb.Y)
		} else if pa.Y > lo && pa.Y < hi {
			want = (pb.X - pa.X) - circleSolid(false, pa.Y, pa.X, pb.X)
		}
		want /= g.H
		if got := f.Open(face); math.Abs(got-want) > exactTol {
			t.Fatalf("face %d from (%g, %g) to (%g, %g): open %.15g, want %.15g", face, pa.X, pa.Y, pb.X, pb.Y, got, want)
		}
		checked++
	}
	if want := f.NumFaces() - g.NX - g.NY; checked != want {
		t.Errorf("checked %d faces, want %d", checked, want)
	}
}

// TestFacesAgainstSampling checks the open length of faces cut by polygons, a NACA section, a
// rounded rectangle and smooth and stepped walls against brute-force sampling of
// Geometry.InFluid along the face.
func TestFacesAgainstSampling(t *testing.T) {
	// samples per face; the sampled length is off by at most one sample spacing per crossing.
	const samples = 4000
	square, err := NewRectangle(Point{0.5, 0.31}, 0.2, 0.13, 0.4, 0)
	if err != nil {
		t.Fatal(err)
	}
	rounded, err := NewRectangle(Point{0.5, 0.3}, 0.25, 0.15, -0.3, 0.04)
	if err != nil {
		t.Fatal(err)
	}
	foil, err := NACA4("2412", 0.5, Point{0.3, 0.33}, 0.1, 80)
	if err != nil {
		t.Fatal(err)
	}
	contraction := []Point{{0, 0.6}, {0.4, 0.6}, {0.7, 0.45}, {1.2, 0.45}}
	step := []Point{{0, 0}, {0.5, 0}, {0.5, 0.08}, {1.2, 0.08}}
	tests := []struct {
		name         string
		lower, upper []Point
		smooth       bool
		bodies       []Body
	}{
		{"rotated square", flat(0, 1.2), flat(0.6, 1.2), false, []Body{{"s", square}}},
		{"rounded rectangle", flat(0, 1.2), flat(0.6, 1.2), false, []Body{{"r", rounded}}},
		{"naca 2412", flat(0, 1.2), flat(0.6, 1.2), false, []Body{{"f", foil}}},
		{"smooth contraction", flat(0, 1.2), contraction, true, nil},
		{"step", step, flat(0.6, 1.2), false, nil},
	}
	for _, tt := range tests {
		t.Run(tt.name, func(t *testing.T) {
			m := facesMesh(t, 1.2, tt.lower, tt.upper, tt.smooth, 0, 0.6, 0.0173, tt.bodies...)
			f, err := NewFaces(m)
			if err != nil {
				t.Fatal(err)
			}
			g := m.Grid
			worst := 0.0
			cut := 0
			for face := range f.NumFaces() {
				k := face / 2
				if face < 2*g.Len() && ((face%2 == 0 && k%g.NX == g.NX-1) || (face%2 == 1 && k/g.NX == g.NY-1)) {
					continue
				}
				got := f.Open(face)
				pa, pb := f.Segment(face)
				full := pb.Sub(pa).Norm() / g.H
				if got == 0 || got == full {
					// Check wholly open or closed faces at their midpoint only.
					if mid := pa.Add(pb).Scale(0.5); m.InFluid(mid) != (got > 0) {
						t.Fatalf("face %d at (%g, %g): open %g but InFluid(midpoint) = %v", face, mid.X, mid.Y, got, m.InFluid(mid))
					}
					continue
				}
				cut++
				in, crossings := 0, 0
				prev := false
				for q := range samples {
					p := pa.Add(pb.Sub(pa).Scale((float64(q) + 0.5) / samples))
					fl := m.InFluid(p)
					if fl {
						in++
					}
					if q > 0 && fl != prev {
						crossings++
					}
					prev = fl
				}
				want := full * float64(in) / samples
				tol := full * float64(crossings+1) / samples
				if math.Abs(got-want) > tol {
					t.Fatalf("face %d from (%g, %g) to (%g, %g): open %.6g, sampled %.6g (tolerance %.2g)", face, pa.X, pa.Y, pb.X, pb.Y, got, want, tol)
				}
				worst = math.Max(worst, math.Abs(got-want))
			}
			if cut < 10 {
				t.Errorf("only %d faces are cut: the geometry does not exercise the cut faces", cut)
			}
			t.Logf("%d cut faces, largest difference from sampling %.2g", cut, worst)
		})
	}
}

// TestFacesPieces checks the grouping of open parts into fluid pieces: a plate thinner than a
// cell splits every cell it runs through into a piece above and a piece below, a cell holding the
// plate's end stays whole (the fluid wraps around the end inside it), the piece of a fluid node is
// 0, cells deep inside a body hold nothing, and every part names valid pieces on both sides.
func TestFacesPieces(t *testing.T) {
	const h = 0.02
	// The plate lies inside the cells of row 25 (y = 0.5), between the node and the cell's top.
	plate, err := NewRectangle(Point{0.6001, 0.5 + 0.2*h}, 0.4, 0.3*h, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	block, err := NewRectangle(Point{0.3, 0.2}, 0.12, 0.12, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	m := facesMesh(t, 1.2, flat(0, 1.2), flat(1, 1.2), false, 0, 1, h, Body{"plate", plate}, Body{"block", block})
	f, err := NewFaces(m)
	if err != nil {
		t.Fatal(err)
	}
	g := m.Grid
	const j = 25
	for i := range g.NX {
		k := g.Index(i, j)
		x := g.X(i)
		want := 1
		if x-h/2 > 0.4001 && x+h/2 < 0.8001 {
			want = 2 // the plate crosses the whole cell
		}
		if got := f.Pieces(k); got != want {
			t.Errorf("cell (%d, %d) at x = %.3f: %d pieces, want %d", i, j, x, got, want)
		}
		if want != 2 {
			continue
		}
		// The east face: the part below the plate belongs to piece 0 (with the node), the part
		// above to piece 1, on both sides.
		var parts []FacePart
		parts = f.Parts(parts, f.EastFace(k))
		if len(parts) != 2 || i == g.NX-1 {
			t.Fatalf("cell (%d, %d): east face has %d parts, want 2", i, j, len(parts))
		}
		next := f.Pieces(k + 1)
		for q, p := range parts {
			wantPiece := uint8(q)
			if p.Low != wantPiece {
				t.Errorf("cell (%d, %d): east part %d [%g, %g] is in piece %d, want %d", i, j, q, p.A, p.B, p.Low, wantPiece)
			}
			if next == 2 && p.High != wantPiece {
				t.Errorf("cell (%d, %d): east part %d is in piece %d of the next cell, want %d", i, j, q, p.High, wantPiece)
			}
		}
	}
	// The block's interior cells hold nothing; every part names pieces that exist.
	if k := g.Index(int(math.Round(0.3/h)), int(math.Round(0.2/h))); f.Pieces(k) != 0 {
		t.Errorf("cell at the block's centre has %d pieces, want 0", f.Pieces(k))
	}
	var parts []FacePart
	for face := range f.NumFaces() {
		low, high := -1, -1
		switch {
		case face >= 2*g.Len():
			high = g.Index(0, face-2*g.Len())
		case face%2 == 0:
			low, high = face/2, face/2+1
		default:
			low, high = face/2, face/2+g.NX
		}
		for _, p := range f.Parts(parts[:0], face) {
			if low >= 0 && int(p.Low) >= f.Pieces(low) {
				t.Fatalf("face %d: low piece %d of %d", face, p.Low, f.Pieces(low))
			}
			if low < 0 && p.Low != NoPiece {
				t.Fatalf("inlet face %d: low piece %d, want NoPiece", face, p.Low)
			}
			if int(p.High) >= f.Pieces(high) {
				t.Fatalf("face %d: high piece %d of %d", face, p.High, f.Pieces(high))
			}
		}
	}
}

// TestFacesGridMustCoverChannel checks that fluid beyond the last row is an error.
func TestFacesGridMustCoverChannel(t *testing.T) {
	lw, _ := NewWall(flat(0, 1), false, false)
	uw, _ := NewWall(flat(0.5, 1), false, true)
	g := Grid{X0: 0, Y0: 0, H: 0.05, NX: 21, NY: 6} // rows reach y = 0.25 only
	m, err := Build(&Geometry{Length: 1, Lower: lw, Upper: uw}, g)
	if err != nil {
		t.Fatal(err)
	}
	_, err = NewFaces(m)
	if err == nil || !strings.Contains(err.Error(), "beyond the grid") {
		t.Fatalf("got error %v, want one about fluid beyond the grid", err)
	}
}

// cutChannel is a 1.5 × 1 channel at spacing h with a bump in its smooth lower wall, a circle
// and a plate thinner than a cell.
func cutChannel(t *testing.T, h float64) *Mesh {
	t.Helper()
	plate, err := NewRectangle(Point{0.9, 0.5 + 0.2*h}, 0.3, 0.3*h, 0, 0)
	if err != nil {
		t.Fatal(err)
	}
	circle := NewCircle(Point{0.4, 0.45}, 0.12)
	lower := []Point{{0, 0}, {0.6, 0.03}, {1.5, 0}}
	return facesMesh(t, 1.5, lower, flat(1, 1.5), true, 0, 1, h, Body{"circle", circle}, Body{"plate", plate})
}

// TestFacesSameOnAnyThreads checks that the faces of a grid with more than faceLinesMin lines
// each way, cut by a smooth wall, a circle and a plate thinner than a cell, are the same, bit for
// bit, whether the lines are cut on one goroutine or shared among several.
func TestFacesSameOnAnyThreads(t *testing.T) {
	m := cutChannel(t, 1.0/300)
	if m.NX <= faceLinesMin || m.NY <= faceLinesMin {
		t.Fatalf("%d × %d nodes: too few lines to share", m.NX, m.NY)
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var want *Faces
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		f, err := NewFaces(m)
		if err != nil {
			t.Fatal(err)
		}
		if want == nil {
			want = f
			if len(f.spans) == 0 {
				t.Fatal("no cut face: the case does not test the joining of parts")
			}
			continue
		}
		if !slices.Equal(f.state, want.state) || !slices.Equal(f.spans, want.spans) || !slices.Equal(f.parts, want.parts) || !slices.Equal(f.pieces, want.pieces) {
			t.Errorf("GOMAXPROCS %d: the faces differ from those cut on one goroutine", procs)
		}
	}
}

// TestFacesFastSameAsGeneral checks that the tiled vertical lines and the shortcuts for faces
// inside one open interval or outside all (facesFast) give every face the same parts, pieces
// included, and every cell the same pieces as one line at a time with every face clipped: on the
// grid of TestFacesSameOnAnyThreads, with more lines than one tile and a last tile cut short.
func TestFacesFastSameAsGeneral(t *testing.T) {
	m := cutChannel(t, 1.0/300)
	if m.NX%faceTile == 0 || m.NX < 2*faceTile {
		t.Fatalf("%d columns: want more than two tiles of %d and a short last one", m.NX, faceTile)
	}
	fast, err := NewFaces(m)
	if err != nil {
		t.Fatal(err)
	}
	facesFast = false
	defer func() { facesFast = true }()
	general, err := NewFaces(m)
	if err != nil {
		t.Fatal(err)
	}
	var whole, closed, cut int
	for face := range general.NumFaces() {
		got, want := fast.Parts(nil, face), general.Parts(nil, face)
		if !slices.Equal(got, want) || fast.Whole(face) != general.Whole(face) {
			a, b := general.Segment(face)
			t.Fatalf("face %d (%v to %v): parts %v, want %v (whole %v, want %v)", face, a, b, got, want, fast.Whole(face), general.Whole(face))
		}
		switch {
		case general.Whole(face):
			whole++
		case len(want) == 0:
			closed++
		default:
			cut++
		}
	}
	if !slices.Equal(fast.pieces, general.pieces) {
		t.Error("the cells' pieces differ")
	}
	if whole == 0 || closed == 0 || cut == 0 {
		t.Errorf("%d whole, %d closed and %d cut faces: the case does not test every kind", whole, closed, cut)
	}
}

// TestArmsFastSameAsGeneral checks that skipping the inner nodes whose links cross nothing
// (armsFast) leaves every node's kind, owner and arms as the general loop over all links sets
// them, on a wavy wall with a circle and a plate thinner than a cell, and that the rows shared
// among 1, 2 or 3 goroutines give the same mesh.
func TestArmsFastSameAsGeneral(t *testing.T) {
	build := func() *Mesh { return cutChannel(t, 1.0/200) }
	same := func(a, b *Mesh) bool {
		return slices.Equal(a.Kind, b.Kind) && slices.Equal(a.Owner, b.Owner) &&
			slices.Equal(a.Cuts, b.Cuts) && slices.Equal(a.cutIdx, b.cutIdx)
	}
	fast := build()
	if fast.NY < 2*meshRowsMin {
		t.Fatalf("%d rows: too few to share", fast.NY)
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 3} {
		runtime.GOMAXPROCS(procs)
		if !same(build(), fast) {
			t.Errorf("GOMAXPROCS %d: the mesh differs", procs)
		}
	}
	armsFast = false
	defer func() { armsFast = true }()
	general := build()
	if len(general.Cuts) == 0 {
		t.Fatal("no cut node: the case tests nothing")
	}
	if !same(fast, general) {
		t.Error("kinds, owners or arms differ from the general loop's")
	}
}

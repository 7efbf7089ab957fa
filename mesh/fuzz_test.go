package mesh

import (
	"encoding/binary"
	"math"
	"testing"
)

// FuzzClassify builds a mesh around a random polygon (up to 12 vertices in a unit channel, grid
// spacing from 1/8 to 1/64) and checks that classification never panics and keeps its
// invariants: arms in [0, 1], a cut arm names a real boundary, Solid nodes inside the polygon and
// Fluid nodes in the fluid. The seeds include polygons grazing grid nodes, repeated points,
// clockwise and degenerate outlines.
func FuzzClassify(f *testing.F) {
	seed := func(h uint8, pts ...float64) []byte {
		b := []byte{h}
		for _, v := range pts {
			b = binary.LittleEndian.AppendUint16(b, uint16(v*65535))
		}
		return b
	}
	f.Add(seed(16, 0.25, 0.25, 0.75, 0.25, 0.5, 0.75))               // nodes exactly on edges
	f.Add(seed(20, 0.3, 0.3, 0.3, 0.7, 0.7, 0.7, 0.7, 0.3))          // clockwise square
	f.Add(seed(33, 0.1, 0.5, 0.9, 0.5001, 0.9, 0.5002, 0.1, 0.5003)) // a sliver thinner than a cell
	f.Add(seed(8, 0.2, 0.2, 0.2, 0.2, 0.8, 0.5, 0.2, 0.8))           // repeated point
	f.Add(seed(40, 0.1, 0.1, 0.9, 0.9, 0.9, 0.1, 0.1, 0.9))          // bow tie (refused)
	f.Fuzz(func(t *testing.T, data []byte) {
		if len(data) < 7 || len(data) > 1+12*4 {
			return
		}
		h := 1 / (8 + float64(data[0]%57))
		var pts []Point
		for q := 1; q+3 < len(data); q += 4 {
			x := float64(binary.LittleEndian.Uint16(data[q:]))/65535*0.8 + 0.1
			y := float64(binary.LittleEndian.Uint16(data[q+2:]))/65535*0.8 + 0.1
			pts = append(pts, Point{x, y})
		}
		poly, err := NewPolygon(pts)
		if err != nil {
			return // refused outlines are fine; panics are not
		}
		lo, _ := NewWall([]Point{{0, 0}, {1, 0}}, false, false)
		up, _ := NewWall([]Point{{0, 1}, {1, 1}}, false, true)
		geo := &Geometry{Length: 1, Lower: lo, Upper: up, Bodies: []Body{{"p", poly}}}
		g, err := PlanGrid(1, 0, 1, h)
		if err != nil {
			t.Fatal(err)
		}
		m, err := Build(geo, g)
		if err != nil {
			t.Fatal(err)
		}
		for _, c := range m.Cuts {
			for d, a := range c.Arms {
				if !(a.Theta >= 0 && a.Theta <= 1) || math.IsNaN(a.Theta) {
					t.Fatalf("node %d dir %d: θ = %g outside [0, 1]", c.Node, d, a.Theta)
				}
				if a.Boundary < NoBoundary || a.Boundary >= m.NumBoundaries() {
					t.Fatalf("node %d dir %d: boundary %d does not exist", c.Node, d, a.Boundary)
				}
			}
		}
		for k, kind := range m.Kind {
			p := m.At(k%m.NX, k/m.NX)
			switch kind {
			case Solid:
				if !poly.Contains(p) {
					t.Fatalf("node %v is Solid but outside the polygon", p)
				}
			case Fluid:
				if poly.Contains(p) {
					t.Fatalf("node %v is Fluid but inside the polygon", p)
				}
			}
		}
	})
}

package solver

import (
	"math/rand/v2"
	"runtime"
	"slices"
	"testing"

	"phipsi/mesh"
)

// TestGridMatrixExact checks that a GridMatrix is the matrix it was made from: the same rows
// back (CSR), the same products and residuals bit for bit, on the ψ and φ systems of the test
// passages (bodies, a step, a foil's sharp edge) and on a grid whose slit gives nodes two
// unknowns; and that nearly every row of the passages is stored as plain.
func TestGridMatrixExact(t *testing.T) {
	type problem struct {
		name      string
		a         *CSR
		g         mesh.Grid
		nodes     []int32
		minPlain  float64 // least share of plain rows
		wantIrreg bool    // some rows must not be plain
	}
	var problems []problem
	for _, p := range mgPassages {
		psi := p.psi(t, 20000)
		problems = append(problems, problem{p.name + "/psi", psi.A.CSR(), psi.Mesh.Grid, psi.Nodes, 0.9, true})
		phi, err := AssemblePhi(psi.Mesh, psi.BC, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		problems = append(problems, problem{p.name + "/phi", phi.A.CSR(), phi.Mesh.Grid, phi.Nodes, 0.9, true})
	}
	a, g, nodes := mgSlit(40, 30)
	problems = append(problems, problem{"slit", a, g, nodes, 0.5, true})

	rng := rand.New(rand.NewPCG(1, 2))
	for _, p := range problems {
		t.Run(p.name, func(t *testing.T) {
			gm := NewGridMatrix(p.a, p.g, p.nodes, firstUnknowns(p.nodes, p.g))
			back := gm.CSR()
			if !slices.Equal(back.RowPtr, p.a.RowPtr) || !slices.Equal(back.Col, p.a.Col) || !slices.Equal(back.Val, p.a.Val) {
				t.Fatal("CSR() differs from the matrix the GridMatrix was made from")
			}
			share := float64(gm.Plain()) / float64(gm.Len())
			if share < p.minPlain || (p.wantIrreg && gm.Plain() == gm.Len()) {
				t.Errorf("plain rows: %d of %d (%.3f), want at least %.2f and not all", gm.Plain(), gm.Len(), share, p.minPlain)
			}
			n := p.a.N
			x, b := make([]float64, n), make([]float64, n)
			for i := range x {
				x[i], b[i] = rng.NormFloat64(), rng.NormFloat64()
			}
			want, got := make([]float64, n), make([]float64, n)
			p.a.MulVecTo(want, x)
			gm.MulVecTo(got, x)
			if !slices.Equal(got, want) {
				t.Error("MulVecTo differs from the CSR's")
			}
			rw := residualTo(p.a, want, b, x)
			rg := residualTo(gm, got, b, x)
			if rw != rg || !slices.Equal(got, want) {
				t.Error("residual differs from the CSR's")
			}
			var k kernels
			d1, d2 := k.mulVecDots2(p.a, want, x, b)
			e1, e2 := k.mulVecDots2(gm, got, x, b)
			if d1 != e1 || d2 != e2 || !slices.Equal(got, want) {
				t.Error("fused products differ from the CSR's")
			}
			f1, _ := roundingFloor(p.a, want, b, x)
			f2, _ := roundingFloor(gm, got, b, x)
			if f1 != f2 {
				t.Errorf("rounding floor %g, CSR's %g", f2, f1)
			}
			t.Logf("plain rows %.4f, %d bytes (%.1f a row)", share, gm.Bytes(), float64(gm.Bytes())/float64(n))
			if p.minPlain >= 0.9 && gm.Bytes() > 12*n {
				t.Errorf("holds %d bytes for %d rows, want at most 12 a row", gm.Bytes(), n)
			}
		})
	}
}

// TestBuildRowsThreads checks that the ψ and φ systems assembled with their rows shared among
// goroutines are the ones assembled on a single goroutine, bit for bit.
func TestBuildRowsThreads(t *testing.T) {
	if testing.Short() {
		t.Skip("a grid above buildRowsMin")
	}
	psi := mgPassageCylinder.psi(t, 2*buildRowsMin)
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	var want *PhiSystem
	var wantPsi *PsiSystem
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		ps, err := AssemblePsi(psi.Mesh, psi.BC)
		if err != nil {
			t.Fatal(err)
		}
		if wantPsi == nil {
			wantPsi = ps
		} else {
			a, b := ps.A.CSR(), wantPsi.A.CSR()
			if !slices.Equal(a.Col, b.Col) || !slices.Equal(a.Val, b.Val) || !slices.Equal(ps.B0, wantPsi.B0) ||
				!slices.Equal(ps.BK[0].Index, wantPsi.BK[0].Index) || !slices.Equal(ps.BK[0].Val, wantPsi.BK[0].Val) {
				t.Errorf("GOMAXPROCS %d: the ψ system differs from the one built on one goroutine", procs)
			}
		}
		sys, err := AssemblePhi(psi.Mesh, psi.BC, []float64{0.3}, nil)
		if err != nil {
			t.Fatal(err)
		}
		if want == nil {
			want = sys
			continue
		}
		a, b := sys.A.CSR(), want.A.CSR()
		if !slices.Equal(a.RowPtr, b.RowPtr) || !slices.Equal(a.Col, b.Col) || !slices.Equal(a.Val, b.Val) ||
			!slices.Equal(sys.B, want.B) || !slices.Equal(sys.A.before, want.A.before) || !slices.Equal(sys.A.plain, want.A.plain) {
			t.Errorf("GOMAXPROCS %d: the system differs from the one built on one goroutine", procs)
		}
	}
}

// TestEndPlainRow checks that EndPlainRow stores the plain stencil where the node admits it, the
// same matrix as adding the entries, refuses at the grid's edge and beside a node with two
// unknowns without changing anything, and panics on a row that already has entries.
func TestEndPlainRow(t *testing.T) {
	g := mesh.Grid{H: 1, NX: 3, NY: 3}
	nodes := make([]int32, g.Len())
	unknown := make([]int32, g.Len())
	for k := range nodes {
		nodes[k], unknown[k] = int32(k), int32(k)
	}
	build := func(direct bool) *GridMatrix {
		b := NewGridBuilder(g, nodes, unknown)
		for u := range g.Len() {
			if direct && b.EndPlainRow() {
				if u != 4 {
					t.Fatalf("row %d: EndPlainRow took an edge node", u)
				}
				continue
			}
			if direct && u == 4 {
				t.Fatal("row 4: EndPlainRow refused the centre node")
			}
			if u == 4 {
				for _, v := range []int{1, 3, 5, 7} {
					b.Add(v, -1)
				}
			}
			b.Add(u, 4)
			b.EndRow()
		}
		return b.Matrix()
	}
	want, got := build(false), build(true)
	if want.Plain() != 1 || got.Plain() != 1 {
		t.Fatalf("plain rows: got %d, want 1 (the added entries give %d)", got.Plain(), want.Plain())
	}
	a, b := want.CSR(), got.CSR()
	if !slices.Equal(a.RowPtr, b.RowPtr) || !slices.Equal(a.Col, b.Col) || !slices.Equal(a.Val, b.Val) {
		t.Error("the matrices differ")
	}
	bld := NewGridBuilder(g, nodes, unknown)
	bld.Add(0, 1)
	expectPanic(t, "already has entries", func() { bld.EndPlainRow() })

	// A west neighbour with two unknowns (a split cell): the row's west entry would be the
	// neighbour's first unknown, not the one before the row's own.
	g = mesh.Grid{H: 1, NX: 4, NY: 3}
	nodes = []int32{0, 1, 2, 3, 4, 5, 5, 6, 7, 8, 9, 10, 11}
	unknown = make([]int32, g.Len())
	for u := len(nodes) - 1; u >= 0; u-- {
		unknown[nodes[u]] = int32(u)
	}
	bld = NewGridBuilder(g, nodes, unknown)
	for u := range nodes {
		if bld.EndPlainRow() {
			t.Fatalf("row %d (node %d): EndPlainRow took it, want no plain row on this grid", u, nodes[u])
		}
		bld.Add(u, 1)
		bld.EndRow()
	}
}

// TestNumberUnknowns checks the numbering against a serial count, with nodes of no, one and two
// unknowns, on 1, 2 and 3 goroutines.
func TestNumberUnknowns(t *testing.T) {
	g := mesh.Grid{H: 1, NX: 37, NY: 3 * numberRowsMin}
	pieces := func(k int) int { return (k * 7 % 5) % 3 } // 0, 1 or 2
	var want []int32
	wantFirst := make([]int32, g.Len())
	for k := range g.Len() {
		wantFirst[k] = -1
		if pieces(k) > 0 {
			wantFirst[k] = int32(len(want))
		}
		for range pieces(k) {
			want = append(want, int32(k))
		}
	}
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		first := make([]int32, g.Len())
		got := numberUnknowns(g, first, pieces)
		if !slices.Equal(got, want) || !slices.Equal(first, wantFirst) {
			t.Errorf("GOMAXPROCS %d: the numbering differs from the serial one", procs)
		}
	}
}

package solver

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestPlainKernelsAgree checks that the plain-run kernels give the same bits with and without
// their vector steps, for runs of every length up to 41 and both colours (the product: no
// colour), and that the scalar loops do what their comments say.
func TestPlainKernelsAgree(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 5))
	const nx = 64
	x0 := make([]float64, 3*nx)
	b := make([]float64, nx)
	for i := range x0 {
		x0[i] = rng.NormFloat64()
	}
	for i := range b {
		b[i] = rng.NormFloat64()
	}
	// A run of n unknowns from column 1 of the middle row; its south and north neighbours are the
	// rows below and above.
	type result struct{ x, r []float64 }
	run := func(kernel string, n, c int) result {
		x := append([]float64(nil), x0...)
		r := make([]float64, n)
		for q := range r {
			r[q] = math.NaN()
		}
		u0 := nx + 1
		xs, xw, xm, xe, xn := stencilSlices(x, u0, n, -nx, nx)
		switch kernel {
		case "init":
			initPlain(xm, b[:n], c)
		case "smooth":
			smoothPlain(xm, xs, xw, xe, xn, b[:n], c)
		case "residual":
			residualPlain(r, xs, xw, xm, xe, xn, b[:n], c)
		case "product":
			plainProduct(r, x, u0, -nx, nx)
		}
		return result{x, r}
	}
	same := func(a, b []float64) bool {
		for i := range a {
			if math.Float64bits(a[i]) != math.Float64bits(b[i]) {
				return false
			}
		}
		return true
	}
	vector := useAVX2
	defer func() { useAVX2 = vector }()
	// The colours each kernel is run with: −1 for none (the residual: no zeroes).
	colours := map[string][]int{"init": {0, 1}, "smooth": {0, 1}, "residual": {-1, 0, 1}, "product": {-1}}
	for _, kernel := range []string{"init", "smooth", "residual", "product"} {
		for n := range 42 {
			for _, c := range colours[kernel] {
				useAVX2 = false
				want := run(kernel, n, c)
				useAVX2 = vector
				got := run(kernel, n, c)
				if !same(got.x, want.x) || !same(got.r, want.r) {
					t.Errorf("%s, n = %d, colour %d: vector steps differ from the scalar loop", kernel, n, c)
				}
				// The scalar loop against the definitions.
				u0 := nx + 1
				for q := range n {
					u := u0 + q
					ax := 4*x0[u] - x0[u-1] - x0[u+1] - x0[u-nx] - x0[u+nx]
					var wantX, wantR float64
					switch {
					case kernel == "init":
						wantX = 0
						if (q-c)%2 == 0 {
							wantX = b[q] / 4
						}
					case kernel == "smooth":
						wantX = x0[u]
						if (q-c)%2 == 0 {
							wantX = (b[q] + x0[u-1] + x0[u+1] + x0[u-nx] + x0[u+nx]) / 4
						}
					case kernel == "product":
						wantX, wantR = x0[u], ax
						if d := math.Abs(want.r[q] - wantR); d > 1e-14*(1+math.Abs(wantR)) {
							t.Fatalf("product, n = %d: (A x)[%d] = %v, want %v", n, q, want.r[q], wantR)
						}
					default:
						wantX = x0[u]
						wantR = b[q] - ax
						if c >= 0 && (q-c)%2 == 0 {
							wantR = 0
						}
						if d := math.Abs(want.r[q] - wantR); d > 1e-14*(1+math.Abs(wantR)) {
							t.Fatalf("%s, n = %d, colour %d: r[%d] = %v, want %v", kernel, n, c, q, want.r[q], wantR)
						}
					}
					if d := math.Abs(want.x[u] - wantX); d > 1e-14*(1+math.Abs(wantX)) {
						t.Fatalf("%s, n = %d, colour %d: x[%d] = %v, want %v", kernel, n, c, q, want.x[u], wantX)
					}
				}
				// Nothing outside the run changes.
				for i := range x0 {
					if (i < u0 || i >= u0+n) && math.Float64bits(want.x[i]) != math.Float64bits(x0[i]) {
						t.Fatalf("%s, n = %d, colour %d: x[%d] outside the run changed", kernel, n, c, i)
					}
				}
			}
		}
	}
	if !vector {
		t.Log("no AVX2 here: only the scalar loops were checked")
	}
}

// TestMultigridVectorStepsSameBits checks that a V-cycle gives the same bits with and without
// the vector steps, on the ψ system of each test passage (with and without operator weights)
// and on its φ system: every kernel with a vector step runs in these, on the finest level and on
// the coarse levels' standard stencils.
func TestMultigridVectorStepsSameBits(t *testing.T) {
	if !useAVX2 {
		t.Skip("no AVX2 here")
	}
	defer func() { useAVX2 = true }()
	for _, p := range mgPassages {
		psi := p.psi(t, 40000)
		phi, err := AssemblePhi(psi.Mesh, psi.BC, nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		cases := []struct {
			name  string
			a     *GridMatrix
			b     []float64
			nodes []int32
			o     MGOptions
		}{
			{"psi", psi.A, psi.B0, psi.Nodes, MGOptions{}},
			{"psi, operator weights", psi.A, psi.B0, psi.Nodes, MGOptions{OperatorWeights: true}},
			{"phi", phi.A, phi.B, phi.Nodes, MGOptions{Symmetric: true}},
		}
		for _, c := range cases {
			mg, err := NewMultigrid(c.a, psi.Mesh.Grid, c.nodes, c.o)
			if err != nil {
				t.Fatal(err)
			}
			run := func(vector bool) []float64 {
				useAVX2 = vector
				x := make([]float64, c.a.N)
				if err := mg.PreconSolve(x, c.b); err != nil {
					t.Fatal(err)
				}
				return x
			}
			want, got := run(false), run(true)
			for q := range got {
				if math.Float64bits(got[q]) != math.Float64bits(want[q]) {
					t.Fatalf("%s, %s: V-cycle gives %v at %d with vector steps, %v without, want the same bits", p.name, c.name, got[q], q, want[q])
				}
			}
		}
	}
}

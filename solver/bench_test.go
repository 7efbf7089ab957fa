package solver

import (
	"context"
	"fmt"
	"math"
	"testing"
)

// benchSides are grid sizes in nodes per side (boundary included): 2^k + 1 nodes, 2^k cells,
// (2^k − 1)² unknowns.
var benchSides = []int{65, 129, 257}

// benchProblem is the Dirichlet Laplacian on the unit square with a smooth harmonic solution,
// so that the iterations have a realistic right-hand side.
func benchProblem(side int) gridProblem {
	u := func(x, y float64) float64 { return math.Sin(2*x) * math.Sinh(2*y) }
	return poisson5(side-1, u, func(x, y float64) float64 { return 0 })
}

func BenchmarkMulVec(b *testing.B) {
	for _, side := range benchSides {
		p := benchProblem(side)
		dst := make([]float64, p.a.N)
		b.Run(fmt.Sprintf("n=%d", side), func(b *testing.B) {
			b.ReportAllocs()
			b.SetBytes(int64(12*p.a.NNZ() + 8*(p.a.N+1) + 16*p.a.N)) // matrix, row pointers, x and dst
			for b.Loop() {
				p.a.MulVecTo(dst, p.exact)
			}
		})
	}
}

func BenchmarkSolve(b *testing.B) {
	methods := []struct {
		name  string
		solve func(p gridProblem, x []float64) (Stats, error)
	}{
		{"cg", func(p gridProblem, x []float64) (Stats, error) {
			return CG(context.Background(), p.a, p.b, x, nil, nil)
		}},
		{"bicgstab", func(p gridProblem, x []float64) (Stats, error) {
			return BiCGStab(context.Background(), p.a, p.b, x, nil, nil)
		}},
		{"sor", func(p gridProblem, x []float64) (Stats, error) {
			s := &SOR{Omega: OptimalOmega(p.n, p.n), Red: p.red, Black: p.black}
			return s.Solve(context.Background(), p.a, p.b, x, nil)
		}},
	}
	for _, m := range methods {
		for _, side := range benchSides {
			p := benchProblem(side)
			x := make([]float64, p.a.N)
			b.Run(fmt.Sprintf("method=%s/n=%d", m.name, side), func(b *testing.B) {
				b.ReportAllocs()
				var iters int
				for b.Loop() {
					clear(x)
					st, err := m.solve(p, x)
					if err != nil {
						b.Fatal(err)
					}
					iters = st.Iterations
				}
				b.ReportMetric(float64(iters), "iters/op")
			})
		}
	}
}

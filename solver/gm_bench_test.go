package solver

import (
	"fmt"
	"testing"
)

// BenchmarkGridMatrixMulVec times one product with the ψ matrix of the channel with a cylinder,
// stored as a GridMatrix and as a CSR, on the calling goroutine.
func BenchmarkGridMatrixMulVec(b *testing.B) {
	for _, size := range mgBenchCells[2:3] {
		sys := mgPassageCylinder.psi(b, size.cells)
		csr := sys.A.CSR()
		x := make([]float64, sys.A.N)
		for i := range x {
			x[i] = float64(i%7) - 3
		}
		dst := make([]float64, sys.A.N)
		for _, m := range []struct {
			name string
			a    Operator
		}{{"grid", sys.A}, {"csr", csr}} {
			b.Run(fmt.Sprintf("format=%s/n=%s", m.name, size.label), func(b *testing.B) {
				for b.Loop() {
					m.a.MulVecTo(dst, x)
				}
				b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/float64(len(x)), "ns/row")
			})
		}
	}
}

package solver

import (
	"context"
	"fmt"
	"testing"
	"time"
)

// mgBenchCells are the grid sizes of the multigrid benchmarks, in cells.
var mgBenchCells = []struct {
	label string
	cells int
}{{"62k", 62500}, {"250k", 250000}, {"1M", 1000000}, {"4M", 4000000}}

// BenchmarkSolvePsi times the stream-function solves of the three test passages (channel with a
// cylinder, forward-facing step, NACA 2412 section) as SolvePsi does them with the multigrid
// method, to the default relative residual 1e-10: the hierarchy, then one BiCGStab solve of the
// system bordered by the bodies' conditions. One op is one SolvePsi (mesh and assembly outside
// the timing). Metrics: setup-s/op and solve-s/op (PsiSolution.Setup and Solve: hierarchy and
// contours, then the solve), iters/op (the solve's iterations), cells.
func BenchmarkSolvePsi(b *testing.B) {
	for _, p := range mgPassages {
		for _, size := range mgBenchCells {
			b.Run(fmt.Sprintf("method=mgbicg/case=%s/n=%s", p.name, size.label), func(b *testing.B) {
				sys := p.psi(b, size.cells)
				b.ReportAllocs()
				var setup, solve time.Duration
				iters := 0
				for b.Loop() {
					sol, err := SolvePsi(context.Background(), sys, MethodMG, nil)
					if err != nil {
						b.Fatal(err)
					}
					for _, st := range sol.Solves {
						iters = max(iters, st.Iterations)
					}
					setup += sol.Setup
					solve += sol.Solve
				}
				b.ReportMetric(setup.Seconds()/float64(b.N), "setup-s/op")
				b.ReportMetric(solve.Seconds()/float64(b.N), "solve-s/op")
				b.ReportMetric(float64(iters), "iters/op")
				b.ReportMetric(float64(sys.Mesh.Grid.Cells()), "cells")
			})
		}
	}
}

// BenchmarkSolvePhi times the velocity-potential solves of the test passages as SolvePhi does
// them with the multigrid method, to the default relative residual 1e-10: the hierarchy, then CG
// with the symmetric V-cycle from the system's initial guess improved by a full-multigrid pass.
// One op is one SolvePhi (mesh and assembly outside the timing). Metrics as for
// BenchmarkSolvePsi (PhiSolution.Setup and Solve).
func BenchmarkSolvePhi(b *testing.B) {
	for _, p := range mgPassages {
		for _, size := range mgBenchCells {
			b.Run(fmt.Sprintf("method=mgcg/case=%s/n=%s", p.name, size.label), func(b *testing.B) {
				psi := p.psi(b, size.cells)
				sys, err := AssemblePhi(psi.Mesh, psi.BC, nil, nil)
				if err != nil {
					b.Fatal(err)
				}
				b.ReportAllocs()
				var setup, solve time.Duration
				iters := 0
				for b.Loop() {
					sol, err := SolvePhi(context.Background(), sys, MethodMG, nil)
					if err != nil {
						b.Fatal(err)
					}
					iters = sol.Stats.Iterations
					setup += sol.Setup
					solve += sol.Solve
				}
				b.ReportMetric(setup.Seconds()/float64(b.N), "setup-s/op")
				b.ReportMetric(solve.Seconds()/float64(b.N), "solve-s/op")
				b.ReportMetric(float64(iters), "iters/op")
				b.ReportMetric(float64(sys.Mesh.Grid.Cells()), "cells")
			})
		}
	}
}

// BenchmarkMultigridPreconSolve times one V-cycle on the ψ system of the channel with a cylinder;
// it must report 0 allocs/op.
func BenchmarkMultigridPreconSolve(b *testing.B) {
	for _, size := range mgBenchCells {
		b.Run("n="+size.label, func(b *testing.B) {
			sys := mgPassageCylinder.psi(b, size.cells)
			mg, err := NewMultigrid(sys.A, sys.Mesh.Grid, sys.Nodes, MGOptions{})
			if err != nil {
				b.Fatal(err)
			}
			dst := make([]float64, sys.A.N)
			b.ReportAllocs()
			for b.Loop() {
				if err := mg.PreconSolve(dst, sys.B0); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

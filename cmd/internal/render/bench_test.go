package render

import (
	"math"
	"testing"
)

// BenchmarkRender draws every image of a run with about a million cells (the analytic pier flow
// on a 1732 × 577 grid) at the default width. The target is ≤ 1 s per op on the project
// machine (issue 2/8).
func BenchmarkRender(b *testing.B) {
	h := math.Sqrt(3.0 / 1e6) // 3 m × 1 m channel: 1e6 cells
	r, phi := pierFlow(b, h)
	b.ReportMetric(float64(r.Sol.Sys.Mesh.Grid.Cells()), "cells")
	b.ResetTimer()
	b.ReportAllocs()
	for range b.N {
		imgs, err := Render(r, phi, Options{Title: "Round pier in a 1 m flume"})
		if err != nil {
			b.Fatal(err)
		}
		if len(imgs) != 6 {
			b.Fatalf("got %d images, want 6", len(imgs))
		}
	}
}

package main

import (
	"context"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"testing"
)

// benchChannel is a one-body channel of about n cells with no pictures: the case whose whole run
// the speed work measures against a direct solver (solver/peer_test.go).
func benchChannel(b testing.TB, cells int) string {
	b.Helper()
	// 6 × 1 channel: (6/h)(1/h) = cells.
	h := 1 / math.Sqrt(float64(cells)/6)
	text := fmt.Sprintf(`name = "bench"
[fluid]
density = 1000
[inflow]
speed = 1.0
pressure = 101325
[channel]
length = 6.0
height = 1.0
[grid]
spacing = %.6g
[[obstacle]]
name = "cylinder"
shape = "circle"
center = [2.5, 0.5]
radius = 0.1
[output]
images = []
`, h)
	path := filepath.Join(b.TempDir(), "bench.toml")
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		b.Fatal(err)
	}
	return path
}

// BenchmarkCompute times everything a run does before it writes files (every solve, the derived
// fields and the summary), without pictures:
//
//	go test -run XXX -bench Compute -benchtime 3x -count 5 ./cmd/phipsi/
func BenchmarkCompute(b *testing.B) {
	for _, cells := range []int{250_000, 1_000_000, 4_000_000} {
		b.Run(fmt.Sprintf("cells=%d", cells), func(b *testing.B) {
			path := benchChannel(b, cells)
			o := &runOptions{maxMemory: byteSize(defaultMaxMemory()), quiet: true}
			plan, err := load(path, o)
			if err != nil {
				b.Fatal(err)
			}
			b.ResetTimer()
			for b.Loop() {
				if _, err := compute(context.Background(), plan, o, io.Discard); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(plan.Grid.Cells()), "cells")
		})
	}
}

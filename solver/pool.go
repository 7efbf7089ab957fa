package solver

import "math"

// This file holds the fixed row-block partition that every vector and matrix kernel of the
// package walks, and the serial driver that walks it. A worker pool can later hand the blocks to
// goroutines: because the partition depends only on the vector length (never on the number of
// workers) and block sums are added in block order, a parallel driver gives bit-identical results.

// blockRows is the number of rows in one work block. Kernels that reduce (dot products, norms)
// sum in row order within a block and then add the block sums in increasing block order.
const blockRows = 2048

// forBlocks calls f on the blocks [lo, hi) that partition 0..n, in increasing order.
func forBlocks(n int, f func(lo, hi int)) {
	for lo := 0; lo < n; lo += blockRows {
		f(lo, min(lo+blockRows, n))
	}
}

// sumBlocks calls f on the blocks [lo, hi) that partition 0..n and returns the sum of the
// results, added in block order.
func sumBlocks(n int, f func(lo, hi int) float64) float64 {
	var sum float64
	for lo := 0; lo < n; lo += blockRows {
		sum += f(lo, min(lo+blockRows, n))
	}
	return sum
}

// sumBlocks2 is sumBlocks for kernels that produce two sums in one pass.
func sumBlocks2(n int, f func(lo, hi int) (float64, float64)) (float64, float64) {
	var s1, s2 float64
	for lo := 0; lo < n; lo += blockRows {
		a, b := f(lo, min(lo+blockRows, n))
		s1 += a
		s2 += b
	}
	return s1, s2
}

// dot returns x·y, reduced block by block.
func dot(x, y []float64) float64 {
	return sumBlocks(len(x), func(lo, hi int) float64 {
		return dotRange(x[lo:hi], y[lo:hi])
	})
}

// dotRange returns x·y summed in index order; y must be at least as long as x.
func dotRange(x, y []float64) float64 {
	y = y[:len(x)]
	var s float64
	for i, xi := range x {
		s += xi * y[i]
	}
	return s
}

// norm returns the Euclidean norm ‖x‖₂ = √(x·x).
func norm(x []float64) float64 {
	return math.Sqrt(dot(x, x))
}

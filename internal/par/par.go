// Package par splits loops over grid rows across goroutines.
//
// The stages around the solves (deriving the velocity field, checking it against φ) treat every
// node on its own, so their rows can be shared out in contiguous ranges; each range writes only
// its own nodes, and results that combine ranges are combined in range order, so the output does
// not depend on the number of goroutines.
package par

import (
	"runtime"
	"sync"
)

// Rows calls f(r, lo, hi) for the ranges r = 0, 1, … of Ranges(n, minRows) contiguous ranges
// [lo, hi) that cover [0, n), one per goroutine, and returns when all have finished; with a single
// range it calls f(0, 0, n) on the calling goroutine. A caller that keeps per-range results
// indexes them by r and combines them in order of r.
func Rows(n, minRows int, f func(r, lo, hi int)) {
	nr := Ranges(n, minRows)
	if nr == 1 {
		if n > 0 {
			f(0, 0, n)
		}
		return
	}
	var wg sync.WaitGroup
	for r := range nr {
		wg.Go(func() { f(r, r*n/nr, (r+1)*n/nr) })
	}
	wg.Wait()
}

// Ranges returns the number of ranges Rows uses for n rows: GOMAXPROCS (at most n) from minRows
// rows up, else 1.
func Ranges(n, minRows int) int {
	if n < minRows {
		return 1
	}
	return max(1, min(runtime.GOMAXPROCS(0), n))
}

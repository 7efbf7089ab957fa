package par

import (
	"runtime"
	"sync/atomic"
	"testing"
)

// TestRowsCover checks that the ranges cover every row once, in order of their index, and that
// their number is Ranges'.
func TestRowsCover(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(0))
	for _, procs := range []int{1, 2, 3} {
		runtime.GOMAXPROCS(procs)
		for _, n := range []int{0, 1, 5, 63, 64, 1000} {
			seen := make([]int32, n)
			var calls atomic.Int32
			lows := make([]int, Ranges(n, 64))
			Rows(n, 64, func(r, lo, hi int) {
				calls.Add(1)
				lows[r] = lo
				for i := lo; i < hi; i++ {
					atomic.AddInt32(&seen[i], 1)
				}
			})
			for i, c := range seen {
				if c != 1 {
					t.Fatalf("GOMAXPROCS %d, n %d: row %d visited %d times", procs, n, i, c)
				}
			}
			if want := Ranges(n, 64); n > 0 && int(calls.Load()) != want {
				t.Errorf("GOMAXPROCS %d, n %d: %d calls, want %d", procs, n, calls.Load(), want)
			}
			for r := 1; r < len(lows); r++ {
				if lows[r] <= lows[r-1] {
					t.Errorf("GOMAXPROCS %d, n %d: range %d starts at %d, not after range %d at %d", procs, n, r, lows[r], r-1, lows[r-1])
				}
			}
		}
	}
}

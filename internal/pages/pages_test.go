package pages

import (
	"math"
	"runtime"
	"runtime/debug"
	"slices"
	"testing"
)

// TestMakeZeroed checks that Make returns a zeroed slice of the asked length, below and above the
// size from which pages are mapped in parallel, and that Touch leaves a new slice's zeros.
func TestMakeZeroed(t *testing.T) {
	for _, n := range []int{0, 1, 511, 512, 513, 3 * minParallel / 8} {
		v := Make[float64](n)
		if len(v) != n || slices.ContainsFunc(v, func(x float64) bool { return x != 0 }) {
			t.Fatalf("Make(%d): length %d or a non-zero value", n, len(v))
		}
		type pair struct{ a, b int32 }
		p := make([]pair, n, n+7)
		Touch(p)
		if slices.ContainsFunc(p[:cap(p)], func(x pair) bool { return x != pair{} }) {
			t.Fatalf("Touch(%d): a non-zero value", n)
		}
	}
}

// TestBudget: under a budget the pacing is off and the limit is the ceiling, also after a
// collection (which runs against the lower limit), until Settle leaves it at the budget's limit;
// restore brings back the previous settings, and without a budget Collect only collects.
func TestBudget(t *testing.T) {
	prevGC := debug.SetGCPercent(100)
	prevLimit := debug.SetMemoryLimit(math.MaxInt64)
	defer debug.SetGCPercent(prevGC)
	defer debug.SetMemoryLimit(prevLimit)

	Collect() // no budget: limit and pacing untouched
	if got := debug.SetMemoryLimit(-1); got != math.MaxInt64 {
		t.Errorf("without a budget: limit %d, want unchanged", got)
	}
	restore := SetBudget(1<<30, 4<<30)
	if got := debug.SetGCPercent(-1); got != -1 {
		t.Errorf("under a budget: GC percent %d, want -1 (off)", got)
	}
	before := readGCs()
	Collect()
	if got := debug.SetMemoryLimit(-1); got != 4<<30 {
		t.Errorf("after Collect: limit %d, want the ceiling %d", got, 4<<30)
	}
	if readGCs() == before {
		t.Errorf("Collect did not collect")
	}
	Settle()
	if got := debug.SetMemoryLimit(-1); got != 1<<30 {
		t.Errorf("after Settle: limit %d, want the budget's limit %d", got, 1<<30)
	}
	restore()
	if got := debug.SetMemoryLimit(-1); got != math.MaxInt64 {
		t.Errorf("after restore: limit %d, want %d", got, int64(math.MaxInt64))
	}
	if got := debug.SetGCPercent(100); got != 100 {
		t.Errorf("after restore: GC percent %d, want 100", got)
	}
}

func readGCs() uint32 {
	var ms runtime.MemStats
	runtime.ReadMemStats(&ms)
	return ms.NumGC
}

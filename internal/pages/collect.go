package pages

import (
	"runtime"
	"runtime/debug"
	"sync"
)

// budget is the memory limit that SetBudget installed and the ceiling Collect lifts it to.
var budget struct {
	sync.Mutex
	limit, ceiling int64
	set            bool
}

// SetBudget turns the collector's proportional pacing off and sets its memory limit to ceiling;
// Collect then collects against limit. It returns a function that restores the previous
// settings. It is meant for a process that works in stages and collects between them (the
// command line): the collector then runs only when asked to, or when the heap reaches ceiling.
func SetBudget(limit, ceiling int64) (restore func()) {
	budget.Lock()
	defer budget.Unlock()
	oldLimit, oldCeiling, oldSet := budget.limit, budget.ceiling, budget.set
	gcPercent := debug.SetGCPercent(-1)
	memLimit := debug.SetMemoryLimit(max(limit, ceiling))
	budget.limit, budget.ceiling, budget.set = limit, max(limit, ceiling), true
	return func() {
		budget.Lock()
		defer budget.Unlock()
		budget.limit, budget.ceiling, budget.set = oldLimit, oldCeiling, oldSet
		debug.SetMemoryLimit(memLimit)
		debug.SetGCPercent(gcPercent)
	}
}

// Collect runs a garbage collection. Under a budget it collects with the memory limit at the
// budget's limit and lifts it to the ceiling again afterwards. The lift matters: the runtime's
// background scavenger aims to retain about 1.1 × (the heap in use at the last collection) ×
// (the heap goal now ÷ the heap goal at that collection), so after a collection at a stage
// boundary, where little is in use, it would hand back to the system the pages the next stage
// is about to reuse, and they would cost a first touch again. Raising the goal after the
// collection keeps them. Measured on 16M-cell runs (four each): 478k–534k page faults without,
// 478k–481k with, for a peak of 1.92 GB (469k pages).
func Collect() { collect(true) }

// Settle runs a garbage collection and leaves the memory limit at the budget's limit (without a
// budget it only collects). It is for the last stages of a run, which allocate little that
// would reuse freed pages but make garbage (pictures, tables): under the lifted limit nothing
// would collect it before the run ends (a 1M-cell run with its pictures peaked at 303 MB
// instead of 193 MB).
func Settle() { collect(false) }

// collect collects against the budget's limit, if there is a budget, and then lifts the limit to
// the ceiling if lift is set.
func collect(lift bool) {
	budget.Lock()
	defer budget.Unlock()
	if budget.set {
		debug.SetMemoryLimit(budget.limit)
	}
	runtime.GC()
	if budget.set && lift {
		debug.SetMemoryLimit(budget.ceiling)
	}
}

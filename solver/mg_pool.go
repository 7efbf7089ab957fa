package solver

import (
	"runtime"
	"sync"
	"sync/atomic"
	"time"
)

// blockTask is a kernel split into numbered blocks of work. The blocks of one run write disjoint
// memory and read nothing another block of the same run writes, so they may run in any order or
// at once with the same result.
type blockTask interface {
	runBlock(b int)
}

// maxTeamWorkers bounds the goroutines a team starts, however large GOMAXPROCS is.
const maxTeamWorkers = 64

// teamSpin is how long a helper keeps watching for the next run before it parks. A V-cycle
// runs a parallel kernel every few hundred microseconds, with the small coarse levels' serial
// work in between; a parked helper takes tens of microseconds or more to wake on these machines
// (measured: with helpers that parked at once, one V-cycle at 1M unknowns took as long on two
// goroutines as on one, 12 ms).
const teamSpin = 200 * time.Microsecond

// team runs block kernels on the calling goroutine and on helper goroutines that it starts on
// first need and keeps, so that a run allocates nothing. A run uses min(GOMAXPROCS, blocks)
// goroutines; block b goes to goroutine b mod that number. Blocks never share a reduction, so the
// result does not depend on how many goroutines there are.
//
// A helper watches for the next run for teamSpin after each one (yielding its thread to any other
// goroutine that is ready), then parks until woken. Between runs the team holds no reference to
// the task. One team serves the whole package (workTeam): runs from several goroutines take
// turns.
type team struct {
	mu      sync.Mutex // held during a run: a team runs one task at a time
	helpers []*teamHelper
	task    blockTask // the current run's task, nil between runs
	nblocks int
	nw      int           // goroutines taking blocks in the current run, the caller included
	gen     atomic.Uint64 // number of runs started; helpers watch it
	pending atomic.Int32  // helpers that have not finished the current run
	quit    atomic.Bool   // set by stop
	// spin is how long helpers watch before they park (teamSpin; tests shorten it), and
	// beforeWake, when set (by tests), runs between the start of a run and the waking of the
	// parked helpers: it stands for the runner's thread being descheduled there.
	spin       time.Duration
	beforeWake func()
}

// teamHelper is one helper goroutine's parking place.
type teamHelper struct {
	wake   chan struct{} // holds at most one token
	parked atomic.Bool   // set by the helper before it waits on wake
}

// workTeam runs the parallel kernels of every Multigrid and Krylov workspace.
var workTeam = newTeam()

// newTeam returns a team with no helpers started yet.
func newTeam() *team { return &team{spin: teamSpin} }

// run calls task.runBlock(b) for every b in [0, nblocks) and returns when all have finished.
// With serial set, or one goroutine allowed, it runs them in order on the calling goroutine.
func (t *team) run(task blockTask, nblocks int, serial bool) {
	nw := 1
	if !serial {
		nw = min(runtime.GOMAXPROCS(0), nblocks, maxTeamWorkers)
	}
	if nw <= 1 {
		for b := range nblocks {
			task.runBlock(b)
		}
		return
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	for len(t.helpers) < nw-1 {
		h := &teamHelper{wake: make(chan struct{}, 1)}
		t.helpers = append(t.helpers, h)
		go t.helper(len(t.helpers), h, t.gen.Load())
	}
	// Every helper takes part in every run (those beyond nw with no blocks), so that none reads
	// the fields of a run while the next is being set up.
	t.task, t.nblocks, t.nw = task, nblocks, nw
	t.pending.Store(int32(len(t.helpers)))
	t.gen.Add(1)
	if t.beforeWake != nil {
		t.beforeWake()
	}
	for _, h := range t.helpers {
		if h.parked.Swap(false) {
			h.wake <- struct{}{}
		}
	}
	t.work(0)
	for spins := 0; t.pending.Load() != 0; spins++ {
		if spins >= 64 {
			runtime.Gosched()
		}
	}
	t.task = nil
}

// stop ends the helpers (for teams other than workTeam, which lives as long as the program). The
// team must not be used afterwards.
func (t *team) stop() {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.quit.Store(true)
	t.gen.Add(1)
	for _, h := range t.helpers {
		if h.parked.Swap(false) {
			h.wake <- struct{}{}
		}
	}
	t.helpers = nil
}

// work runs the blocks of goroutine w of the current run.
func (t *team) work(w int) {
	for b := w; b < t.nblocks; b += t.nw {
		t.task.runBlock(b)
	}
}

// helper is the loop of helper goroutine w; seen is the number of runs started before it.
func (t *team) helper(w int, h *teamHelper, seen uint64) {
	for {
		seen = t.await(h, seen)
		if t.quit.Load() {
			return
		}
		if w < t.nw {
			t.work(w)
		}
		t.pending.Add(-1)
	}
}

// await returns the number of runs started once it exceeds seen: watching for teamSpin, then
// parked. A runner that finds the helper parked clears the flag and sends one token; a helper
// that sees the new run after setting the flag takes the flag back, or, if the runner took it
// first, the token. A runner may reach a helper's flag only after the helper has done the run
// and parked again (the runner's thread was descheduled meanwhile): that token wakes the helper
// to no new run, and it parks again.
func (t *team) await(h *teamHelper, seen uint64) uint64 {
	start := time.Now()
	for spins := 0; ; spins++ {
		if g := t.gen.Load(); g != seen {
			return g
		}
		if spins%64 == 63 {
			if time.Since(start) > t.spin {
				break
			}
			runtime.Gosched()
		}
	}
	for {
		h.parked.Store(true)
		if g := t.gen.Load(); g != seen {
			if !h.parked.Swap(false) {
				<-h.wake
			}
			return g
		}
		<-h.wake
		if g := t.gen.Load(); g != seen {
			return g
		}
	}
}

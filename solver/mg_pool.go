package solver

import (
	"runtime"
	"sync"
)

// blockTask is a kernel split into numbered blocks of work. The blocks of one run write disjoint
// memory and read nothing another block of the same run writes, so they may run in any order or
// at once with the same result.
type blockTask interface {
	runBlock(b int)
}

// maxTeamWorkers bounds the goroutines a team starts, however large GOMAXPROCS is.
const maxTeamWorkers = 64

// team runs block kernels on the calling goroutine and on helper goroutines that it starts on
// first need and keeps for later runs, so that a run allocates nothing. A run uses
// min(GOMAXPROCS, blocks) goroutines; block b goes to goroutine b mod that number. Blocks never
// share a reduction, so the result does not depend on how many goroutines there are.
//
// Between runs the team holds no reference to the task, so the owner of a team can become
// unreachable while the helpers wait; the owner stops them with stop (Multigrid does so from a
// cleanup when it is collected).
type team struct {
	mu      sync.Mutex      // held during a run: a team runs one task at a time
	wake    []chan struct{} // one per helper; closed by stop
	done    chan struct{}
	task    blockTask // the current run's task, nil between runs
	nblocks int
	nw      int // goroutines taking part in the current run, the caller included
	stopped bool
}

// newTeam returns a team with no helpers started yet.
func newTeam() *team {
	return &team{done: make(chan struct{}, maxTeamWorkers)}
}

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
	for len(t.wake) < nw-1 && !t.stopped {
		w := len(t.wake) + 1
		ch := make(chan struct{})
		t.wake = append(t.wake, ch)
		go t.helper(w, ch)
	}
	nw = min(nw, len(t.wake)+1)
	t.task, t.nblocks, t.nw = task, nblocks, nw
	for w := 1; w < nw; w++ {
		t.wake[w-1] <- struct{}{}
	}
	t.work(0)
	for w := 1; w < nw; w++ {
		<-t.done
	}
	t.task = nil
}

// work runs the blocks of goroutine w of the current run.
func (t *team) work(w int) {
	for b := w; b < t.nblocks; b += t.nw {
		t.task.runBlock(b)
	}
}

// helper is the loop of helper goroutine w: one share of a run per wake-up, until wake closes.
func (t *team) helper(w int, wake chan struct{}) {
	for range wake {
		t.work(w)
		t.done <- struct{}{}
	}
}

// stop ends the helper goroutines. The team must not be used afterwards.
func (t *team) stop() {
	t.mu.Lock()
	defer t.mu.Unlock()
	t.stopped = true
	for _, ch := range t.wake {
		close(ch)
	}
	t.wake = nil
}

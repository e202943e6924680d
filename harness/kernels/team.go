package kernels

import (
	"runtime"
	"sync"
	"sync/atomic"
	"time"
)

// teamSpin is how long an idle helper keeps polling for the next region
// before it sleeps. A decode step runs a parallel region every few tens of
// microseconds; a helper woken from sleep for each one (a futex wake-up,
// which on a virtual machine can take as long as the region itself) arrives
// after the caller has done the work alone.
const teamSpin = 200 * time.Microsecond

// Team is a set of helper goroutines that stay awake between parallel
// regions, so that the many short regions of a single-token step (a
// kept head's projections, a sparse MLP's gathers, a 768-wide GEMV) are
// really shared. A helper polls for work for teamSpin after each region,
// then sleeps until the next one. A Team runs one region at a time; a
// region that finds it busy (another goroutine's) runs on fresh goroutines
// as if there were no Team, so a Team is safe for concurrent use. The zero
// value and nil have no helpers. Results never depend on a Team: it only
// decides which goroutine runs which job.
type Team struct {
	mu      sync.Mutex // held for the duration of one region
	helpers []*helper
	closed  bool
}

// helper is one goroutine of a Team.
type helper struct {
	task atomic.Pointer[func()] // the region's work, until the helper takes it
	done atomic.Bool            // the helper finished the region's work
	wake chan struct{}          // a sleeping helper waits here
	quit chan struct{}
}

// NewTeam returns a Team of n helpers (none when n < 1), started on first use.
func NewTeam(n int) *Team {
	return &Team{helpers: make([]*helper, max(n, 0))}
}

// Close stops the helpers; later regions run on fresh goroutines. It is
// safe to call more than once.
func (t *Team) Close() {
	if t == nil {
		return
	}
	t.mu.Lock()
	defer t.mu.Unlock()
	for _, h := range t.helpers {
		if h != nil {
			close(h.quit)
		}
	}
	t.helpers, t.closed = nil, true
}

// helping reports whether t has helpers to lend.
func (t *Team) helping() bool { return t != nil && len(t.helpers) > 0 }

// run runs work on the caller and on workers-1 helpers and returns true,
// or returns false (having run nothing) when t has too few helpers or is
// busy with another region.
func (t *Team) run(workers int, work func()) bool {
	if t == nil || workers-1 > len(t.helpers) || !t.mu.TryLock() {
		return false
	}
	defer t.mu.Unlock()
	if t.closed {
		return false
	}
	hs := t.helpers[:workers-1]
	for i, h := range hs {
		if h == nil {
			h = &helper{wake: make(chan struct{}, 1), quit: make(chan struct{})}
			t.helpers[i] = h
			go h.loop()
		}
		h.done.Store(false)
		h.task.Store(&work)
		select {
		case h.wake <- struct{}{}:
		default:
		}
	}
	work()
	for _, h := range hs {
		// A helper that has not taken the work yet finds nothing left:
		// take it back rather than wait for it to wake.
		if h.task.CompareAndSwap(&work, nil) {
			continue
		}
		for !h.done.Load() {
			runtime.Gosched()
		}
	}
	return true
}

// loop is a helper's life: run each region's work, poll for the next one
// for teamSpin, then sleep until woken.
func (h *helper) loop() {
	for {
		idle := time.Now()
		for {
			if f := h.task.Swap(nil); f != nil {
				(*f)()
				h.done.Store(true)
				idle = time.Now()
				continue
			}
			if time.Since(idle) > teamSpin {
				break
			}
			runtime.Gosched()
		}
		select {
		case <-h.wake:
		case <-h.quit:
			return
		}
	}
}

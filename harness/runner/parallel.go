package runner

import (
	"sync"
	"sync/atomic"

	"sparsegate/harness/engine"
)

// Items and windows are independent, so a target with several threads
// scores that many of them at once, each on a single-threaded view of the
// model, rather than one at a time with the threads splitting every
// product: small products split poorly, whole items not at all. The engine
// gives the same bits for any thread count, so the results do not depend
// on the split.

// lane is one worker's engine view and hook.
type lane struct {
	model *engine.Model
	hook  engine.Hook
}

// lanes returns the workers for n units of work on t: one lane on the
// model itself when t has one thread or there is at most one unit, else
// min(threads, n) lanes on single-threaded views, each with its own hook.
func lanes(t *Target, n int) []lane {
	threads := t.Model.Threads()
	if threads <= 1 || n <= 1 {
		return []lane{{t.Model, t.hook(nil, false)}}
	}
	out := make([]lane, min(threads, n))
	for i := range out {
		out[i] = lane{t.Model.WithThreads(1), t.hookThreads(nil, false, 1)}
	}
	return out
}

// forEach runs fn(l, i) for i < n, handing out indices in ascending order to
// the lanes (one goroutine each; the caller runs the first). After a failure
// no further index starts; the error returned is the one of the lowest
// failing index, which is the first failure a one-lane run would meet (every
// lower index was handed out earlier and ran to the end).
func forEach(ls []lane, n int, fn func(l lane, i int) error) error {
	var next atomic.Int64
	var failed atomic.Bool
	errs := make([]error, n)
	work := func(l lane) {
		for !failed.Load() {
			i := int(next.Add(1) - 1)
			if i >= n {
				return
			}
			if err := fn(l, i); err != nil {
				errs[i] = err
				failed.Store(true)
			}
		}
	}
	var wg sync.WaitGroup
	for _, l := range ls[1:] {
		wg.Go(func() { work(l) })
	}
	work(ls[0])
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// progressCounter calls prog with the number of finished units, from any
// lane, one call at a time and with the count rising by one each call.
type progressCounter struct {
	mu    sync.Mutex
	done  int
	total int
	prog  func(done, total int)
}

func (p *progressCounter) step() {
	p.mu.Lock()
	defer p.mu.Unlock()
	p.done++
	p.prog(p.done, p.total)
}

package kernels

import (
	"sync"
	"sync/atomic"
)

// workerCount picks how many goroutines run nJobs jobs of a problem with
// work multiply-adds in total: at most threads, at most nJobs, and few
// enough that each worker gets at least minWorkPerWorker multiply-adds.
// The count affects only scheduling, never the arithmetic.
func workerCount(threads, nJobs, work int) int {
	const minWorkPerWorker = 1 << 17
	w := threads
	if w > nJobs {
		w = nJobs
	}
	if byWork := work / minWorkPerWorker; w > byWork {
		w = byWork
	}
	if w < 1 {
		w = 1
	}
	return w
}

// runJobs runs jobs 0…nJobs-1 on workers goroutines. Each worker is set up
// once by newWorker (for its scratch buffers) and then takes the next job
// index until none are left. The calling goroutine is one of the workers, so
// a call starts working at once and a helper that wakes late only takes the
// jobs that are left; with one worker everything runs in the caller.
func runJobs(nJobs, workers int, newWorker func() func(job int)) {
	if nJobs <= 0 {
		return
	}
	if workers <= 1 {
		do := newWorker()
		for j := 0; j < nJobs; j++ {
			do(j)
		}
		return
	}
	var next atomic.Int64
	work := func() {
		do := newWorker()
		for {
			j := int(next.Add(1) - 1)
			if j >= nJobs {
				return
			}
			do(j)
		}
	}
	var wg sync.WaitGroup
	for range workers - 1 {
		wg.Go(work)
	}
	work()
	wg.Wait()
}

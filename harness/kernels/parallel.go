package kernels

import (
	"sync"
	"sync/atomic"
)

// workerCount picks how many goroutines run nJobs jobs of a problem with
// work multiply-adds in total: at most threads, at most nJobs, and few
// enough that each worker gets at least a minimum of multiply-adds, smaller
// when team has helpers awake to hand work to than when each region starts
// fresh goroutines. The count affects only scheduling, never the arithmetic.
func workerCount(team *Team, threads, nJobs, work int) int {
	minWorkPerWorker := 1 << 17
	if team.helping() {
		minWorkPerWorker = 1 << 14
	}
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

// RunJobs runs jobs 0…nJobs-1 on up to threads goroutines, the caller and
// s's Team helpers when they are free (fresh goroutines otherwise), as the
// products share their work: newWorker sets each worker up once (its
// scratch) and returns the function that runs one job. Jobs must not depend
// on which worker runs them or in what order, so that results do not depend
// on threads. For work outside the products that a single-token step would
// otherwise run on one thread (a decode row's attention heads).
func (s *Scratch) RunJobs(nJobs, threads int, newWorker func() func(job int)) {
	runJobs(s.team(), nJobs, max(1, min(threads, nJobs)), newWorker)
}

// runJobs runs jobs 0…nJobs-1 on workers goroutines: the caller and
// helpers of team when it has them free, fresh goroutines otherwise. Each
// worker is set up once by newWorker (for its scratch buffers) and then
// takes the next job index until none are left. The calling goroutine is one
// of the workers, so a call starts working at once and a helper that wakes
// late only takes the jobs that are left; with one worker everything runs in
// the caller.
func runJobs(team *Team, nJobs, workers int, newWorker func() func(job int)) {
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
	if team.run(workers, work) {
		return
	}
	var wg sync.WaitGroup
	for range workers - 1 {
		wg.Go(work)
	}
	work()
	wg.Wait()
}

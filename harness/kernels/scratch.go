package kernels

import (
	"sync"
	"sync/atomic"
)

// Scratch keeps the GEMM path's packing buffers between calls, so that a
// caller running many products (an engine scoring thousands of windows)
// does not allocate, and the garbage collector need not reclaim, fresh
// buffers for every worker of every call. The zero value is ready to use
// and safe for concurrent use. Results never depend on it: every buffer is
// overwritten before it is read.
type Scratch struct {
	// Team, when set (before the Scratch's first use), lends its helpers
	// to the parallel regions of the products run through this Scratch.
	Team *Team

	gemm   sync.Pool    // of *gemmScratch
	shared [2]sync.Pool // of *[]float32, by sharedUse: buffers a call's workers share
}

// sharedUse names a buffer a GEMM call's workers share. Each use has a pool
// of its own: sharing one, a call asking for both would get back the other's
// buffer, too small half the time, and allocate afresh on every call.
type sharedUse int

const (
	usePackedX sharedUse = iota // the call's packed x
	usePackedB                  // the call's packed B (when its rows are split over jobs)
)

// Linear is the package-level Linear, taking its packing buffers from s.
func (s *Scratch) Linear(y, x []float32, m int, w *Mat, bias []float32, threads int) {
	linear(s, y, x, m, w, bias, threads)
}

// team returns s's Team (nil when s is nil).
func (s *Scratch) team() *Team {
	if s == nil {
		return nil
	}
	return s.Team
}

// get returns a packing buffer set from s, or a fresh one when s is nil or
// holds none.
func (s *Scratch) get() *gemmScratch {
	if s != nil {
		if g, ok := s.gemm.Get().(*gemmScratch); ok {
			return g
		}
	}
	return newGemmScratch()
}

// floats returns a buffer of n floats for use, from s when it holds one
// large enough (its contents are overwritten before use).
func (s *Scratch) floats(use sharedUse, n int) []float32 {
	if s != nil {
		if b, ok := s.shared[use].Get().(*[]float32); ok && cap(*b) >= n {
			return (*b)[:n]
		}
	}
	return make([]float32, n)
}

// putFloats hands a buffer floats returned back to s (a no-op when s is nil).
func (s *Scratch) putFloats(use sharedUse, b []float32) {
	if s != nil {
		s.shared[use].Put(&b)
	}
}

// put hands buffer sets back to s (a no-op when s is nil).
func (s *Scratch) put(gs []*gemmScratch) {
	if s == nil {
		return
	}
	for _, g := range gs {
		if g != nil {
			s.gemm.Put(g)
		}
	}
}

// workerScratch hands each of a call's workers its own buffer set and
// returns them all to s once the call is done.
type workerScratch struct {
	s    *Scratch
	next atomic.Int32
	sets []*gemmScratch
}

func (w *workerScratch) take() *gemmScratch {
	g := w.s.get()
	w.sets[w.next.Add(1)-1] = g
	return g
}

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

	gemm sync.Pool // of *gemmScratch
	a    sync.Pool // of *[]float32: packed x, shared by a call's workers
	b    sync.Pool // of *[]float32: packed B, shared by a call's workers
}

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

// packedA returns a buffer of n floats for a call's packed x, from s when
// it holds one large enough (its contents are overwritten before use).
func (s *Scratch) packedA(n int) []float32 {
	if s == nil {
		return make([]float32, n)
	}
	return pooledFloats(&s.a, n)
}

// putPackedA hands a packed-x buffer back to s (a no-op when s is nil).
func (s *Scratch) putPackedA(b []float32) {
	if s != nil {
		s.a.Put(&b)
	}
}

// packedB is packedA for a call's shared packed B. It has a pool of its
// own: sharing x's, a call asking for both would get back the other's
// buffer, too small half the time, and allocate afresh on every call.
func (s *Scratch) packedB(n int) []float32 {
	if s == nil {
		return make([]float32, n)
	}
	return pooledFloats(&s.b, n)
}

// putPackedB hands a packed-B buffer back to s (a no-op when s is nil).
func (s *Scratch) putPackedB(b []float32) {
	if s != nil {
		s.b.Put(&b)
	}
}

// pooledFloats returns a buffer of n floats from p when it holds one large
// enough, a fresh one otherwise.
func pooledFloats(p *sync.Pool, n int) []float32 {
	if b, ok := p.Get().(*[]float32); ok && cap(*b) >= n {
		return (*b)[:n]
	}
	return make([]float32, n)
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

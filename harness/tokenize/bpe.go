package tokenize

import (
	"container/heap"
	"sync"
)

// mergeInfo is what a merge rule yields for one adjacent symbol pair.
type mergeInfo struct {
	rank   int32 // position in the merge list; lower merges first
	result int32 // id of the merged symbol
}

// pairKey packs an adjacent symbol pair into one map key.
func pairKey(a, b int32) uint64 { return uint64(uint32(a))<<32 | uint64(uint32(b)) }

// smallChunk is the symbol count up to which the quadratic scan is used;
// longer chunks use the heap. Both give identical results.
const smallChunk = 48

// applyMerges runs BPE on syms (initial byte symbols) in place and returns
// the merged symbols: repeatedly merge the adjacent pair with the lowest
// rank, the leftmost such pair first.
func applyMerges(syms []int32, merges map[uint64]mergeInfo) []int32 {
	if len(syms) <= smallChunk {
		return applyMergesScan(syms, merges)
	}
	return applyMergesHeap(syms, merges)
}

func applyMergesScan(syms []int32, merges map[uint64]mergeInfo) []int32 {
	for len(syms) > 1 {
		best := -1
		var bestInfo mergeInfo
		for i := 0; i+1 < len(syms); i++ {
			m, ok := merges[pairKey(syms[i], syms[i+1])]
			if ok && (best < 0 || m.rank < bestInfo.rank) {
				best, bestInfo = i, m
			}
		}
		if best < 0 {
			break
		}
		syms[best] = bestInfo.result
		syms = append(syms[:best+1], syms[best+2:]...)
	}
	return syms
}

// mergeCand is a queued candidate merge of the symbol at pos with its
// right neighbour; left and right record the ids it was queued for, so a
// stale candidate is recognised when popped.
type mergeCand struct {
	rank, pos, left, right, result int32
}

type candHeap []mergeCand

func (h candHeap) Len() int { return len(h) }
func (h candHeap) Less(i, j int) bool {
	if h[i].rank != h[j].rank {
		return h[i].rank < h[j].rank
	}
	return h[i].pos < h[j].pos
}
func (h candHeap) Swap(i, j int) { h[i], h[j] = h[j], h[i] }
func (h *candHeap) Push(x any)   { *h = append(*h, x.(mergeCand)) }
func (h *candHeap) Pop() any {
	old := *h
	x := old[len(old)-1]
	*h = old[:len(old)-1]
	return x
}

func applyMergesHeap(syms []int32, merges map[uint64]mergeInfo) []int32 {
	n := len(syms)
	next := make([]int32, n)
	prev := make([]int32, n)
	for i := range syms {
		next[i] = int32(i + 1)
		prev[i] = int32(i - 1)
	}
	next[n-1] = -1
	dead := make([]bool, n)
	h := make(candHeap, 0, n)
	push := func(pos int32) {
		nx := next[pos]
		if nx < 0 {
			return
		}
		if m, ok := merges[pairKey(syms[pos], syms[nx])]; ok {
			heap.Push(&h, mergeCand{rank: m.rank, pos: pos, left: syms[pos], right: syms[nx], result: m.result})
		}
	}
	for i := 0; i+1 < n; i++ {
		push(int32(i))
	}
	for h.Len() > 0 {
		c := heap.Pop(&h).(mergeCand)
		nx := next[c.pos]
		if dead[c.pos] || nx < 0 || syms[c.pos] != c.left || syms[nx] != c.right {
			continue
		}
		syms[c.pos] = c.result
		dead[nx] = true
		next[c.pos] = next[nx]
		if next[nx] >= 0 {
			prev[next[nx]] = c.pos
		}
		if p := prev[c.pos]; p >= 0 {
			push(p)
		}
		push(c.pos)
	}
	out := syms[:0]
	for i := int32(0); i >= 0; i = next[i] {
		out = append(out, syms[i])
	}
	return out
}

// chunkCache memoises chunk → ids. It only ever stores what applyMerges
// computes, so results never depend on it.
type chunkCache struct {
	mu sync.RWMutex
	m  map[string][]int32
}

const (
	cacheMaxEntries  = 1 << 16
	cacheMaxChunkLen = 256
)

func (c *chunkCache) get(k string) ([]int32, bool) {
	c.mu.RLock()
	v, ok := c.m[k]
	c.mu.RUnlock()
	return v, ok
}

func (c *chunkCache) put(k string, v []int32) {
	c.mu.Lock()
	if c.m == nil || len(c.m) >= cacheMaxEntries {
		c.m = make(map[string][]int32, 1024)
	}
	c.m[k] = v
	c.mu.Unlock()
}

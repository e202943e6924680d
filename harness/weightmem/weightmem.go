// Package weightmem holds the engine's long-lived weight copies (panel
// copies, neuron-major copies, widened matrices) in memory mapped outside
// the Go heap, advised to use transparent huge pages where the system
// offers them.
//
// A decode step reads every weight once and a sparse one reads thousands of
// scattered rows, so with 4 KiB pages nearly every row costs a translation
// miss; with 2 MiB pages the translations of a whole model fit in the
// processor's second-level TLB. An Arena hands out zeroed slices carved from
// a few large mappings and releases them all at once: the model that owns it
// closes it when it is closed itself, and nothing it handed out may be used
// afterwards. Where mapping is not available (another OS, or mmap fails)
// slices come from the Go heap instead, which changes no value.
package weightmem

import (
	"sync"
	"unsafe"
)

// align is the alignment of every slice an Arena hands out: a cache line,
// so that the kernels' vector loads never straddle one needlessly.
const align = 64

// chunkBytes is the size of one mapping (a multiple of hugePage); larger
// requests get a mapping of their own size.
const chunkBytes = 32 << 20

// hugePage is the transparent huge page size the mappings are aligned to.
const hugePage = 2 << 20

// Arena hands out zeroed slices for weight copies; see the package
// documentation. A nil *Arena hands out ordinary heap slices. It is safe
// for concurrent use.
type Arena struct {
	mu       sync.Mutex
	mappings [][]byte // unmapped by Close
	free     []byte   // the unused rest of the newest mapping
	mapped   int64
	closed   bool
}

// New returns an empty Arena; mappings are made on first use.
func New() *Arena { return new(Arena) }

// Uint16s returns a zeroed slice of n values (binary16 or bfloat16 bit
// patterns).
func (a *Arena) Uint16s(n int) []uint16 { return carve[uint16](a, n) }

// Float32s returns a zeroed slice of n values.
func (a *Arena) Float32s(n int) []float32 { return carve[float32](a, n) }

// carve returns a zeroed slice of n values of T from a, or from the heap
// when a has no mapping to give.
func carve[T uint16 | float32](a *Arena, n int) []T {
	if n == 0 {
		return []T{}
	}
	var zero T
	b := a.bytes(n * int(unsafe.Sizeof(zero)))
	if b == nil {
		return make([]T, n)
	}
	return unsafe.Slice((*T)(unsafe.Pointer(&b[0])), n)
}

// MappedBytes is the address space the Arena has mapped so far (resident
// memory is what has been written).
func (a *Arena) MappedBytes() int64 {
	if a == nil {
		return 0
	}
	a.mu.Lock()
	defer a.mu.Unlock()
	return a.mapped
}

// bytes returns n zeroed bytes aligned to align from a mapping, or nil when
// the heap must serve the request (nil or closed Arena, no mapping).
func (a *Arena) bytes(n int) []byte {
	if a == nil {
		return nil
	}
	a.mu.Lock()
	defer a.mu.Unlock()
	if a.closed {
		return nil
	}
	need := (n + align - 1) &^ (align - 1)
	if need > len(a.free) {
		size := max(chunkBytes, (need+hugePage-1)&^(hugePage-1))
		m := mapHuge(size)
		if m == nil {
			return nil
		}
		a.mappings = append(a.mappings, m)
		a.mapped += int64(len(m))
		if size > chunkBytes {
			// A large request has its mapping to itself; the current
			// chunk's rest stays for the smaller ones.
			return m[:n:n]
		}
		a.free = m
	}
	b := a.free[:n:n]
	a.free = a.free[need:]
	return b
}

// Close unmaps everything the Arena handed out; later requests come from
// the heap. It is safe to call more than once and on nil.
func (a *Arena) Close() error {
	if a == nil {
		return nil
	}
	a.mu.Lock()
	defer a.mu.Unlock()
	var first error
	for _, m := range a.mappings {
		if err := unmapHuge(m); err != nil && first == nil {
			first = err
		}
	}
	a.mappings, a.free, a.closed = nil, nil, true
	return first
}

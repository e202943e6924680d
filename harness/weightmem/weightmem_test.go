package weightmem

import (
	"testing"
	"unsafe"

	"github.com/stretchr/testify/require"
)

// checkSlices asserts that the slices are zeroed, of their length and
// capacity, aligned to a cache line (when from a mapping) and disjoint: each
// is filled with its own value and read back after all are written.
func checkSlices(t *testing.T, a *Arena, sizes []int) {
	t.Helper()
	var got [][]float32
	for i, n := range sizes {
		var s []float32
		if i%2 == 0 {
			s = a.Float32s(n)
		} else {
			h := a.Uint16s(2 * n)
			require.Len(t, h, 2*n)
			require.Equal(t, 2*n, cap(h), "a slice's capacity must end where it does")
			require.True(t, allZero16(h), "slice %d not zeroed", i)
			s = unsafe.Slice((*float32)(unsafe.Pointer(unsafe.SliceData(h))), n)
		}
		require.Len(t, s, n)
		require.True(t, allEqual(s, 0), "slice %d not zeroed", i)
		if a.MappedBytes() > 0 && !a.closed && n > 0 {
			require.Zero(t, uintptr(unsafe.Pointer(&s[0]))%align, "slice %d not aligned", i)
		}
		for j := range s {
			s[j] = float32(i + 1)
		}
		got = append(got, s)
	}
	for i, s := range got {
		require.True(t, allEqual(s, float32(i+1)), "slice %d was overwritten by another", i)
	}
}

func allZero16(s []uint16) bool {
	for _, v := range s {
		if v != 0 {
			return false
		}
	}
	return true
}

func allEqual(s []float32, want float32) bool {
	for _, v := range s {
		if v != want {
			return false
		}
	}
	return true
}

func TestArenaSlices(t *testing.T) {
	a := New()
	defer a.Close()
	// Small ones share a mapping, one is larger than a chunk, odd sizes
	// leave unaligned ends.
	checkSlices(t, a, []int{1, 3, 1000, 17, chunkBytes/4 + 5, 0, 4096, chunkBytes / 8})
	if a.MappedBytes() > 0 {
		require.GreaterOrEqual(t, a.MappedBytes(), int64(chunkBytes+chunkBytes/4))
		require.Zero(t, a.MappedBytes()%hugePage)
	}
}

func TestNilArenaUsesHeap(t *testing.T) {
	var a *Arena
	checkSlices(t, a, []int{5, 0, 100})
	require.Zero(t, a.MappedBytes())
	require.NoError(t, a.Close())
}

func TestClosedArenaUsesHeap(t *testing.T) {
	a := New()
	s := a.Float32s(10)
	s[9] = 1
	require.NoError(t, a.Close())
	require.NoError(t, a.Close(), "a second Close is harmless")
	checkSlices(t, a, []int{10, 20})
}

func TestArenaConcurrent(t *testing.T) {
	a := New()
	defer a.Close()
	done := make(chan []float32)
	for g := range 8 {
		go func() {
			s := a.Float32s(100000 + g)
			for i := range s {
				s[i] = float32(g)
			}
			done <- s
		}()
	}
	var all [][]float32
	for range 8 {
		all = append(all, <-done)
	}
	for _, s := range all {
		g := len(s) - 100000
		require.True(t, allEqual(s, float32(g)), "goroutine %d's slice overlaps another", g)
	}
}

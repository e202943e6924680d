package sparsity

import "math"

// rankKey maps unit i with score v to a key that orders units exactly as
// ranksBefore does, larger first: the score's order in the high 32 bits
// (-0 equal to +0, NaN below every number) and the complemented index in
// the low 32 bits, so that ties go to the lower index and no two keys of
// distinct units are equal.
func rankKey(v float32, i int) uint64 {
	var hi uint32
	switch {
	case v != v: // NaN ranks last
		hi = 0
	case v == 0:
		hi = 0x80000000 // -0 and +0 tie
	default:
		b := math.Float32bits(v)
		if b&0x80000000 != 0 {
			hi = ^b
		} else {
			hi = b | 0x80000000
		}
	}
	return uint64(hi)<<32 | uint64(^uint32(i))
}

// topKKeys appends to dst[:0], ascending, the indices of the k values that
// rank first (ranksBefore's order: larger first, ties to the lower index,
// NaN last). scratch must hold at least 2·len(vals) keys. It finds the k-th
// key by quickselect on the keys themselves (no comparisons through a
// closure), then collects every index whose key is at least that one in a
// single ascending pass, so no sort is needed.
func topKKeys(dst []int32, scratch []uint64, vals []float32, k int) []int32 {
	n := len(vals)
	dst = dst[:0]
	if k == 0 {
		return dst
	}
	keys, work := scratch[:n], scratch[n:2*n]
	for i, v := range vals {
		keys[i] = rankKey(v, i)
	}
	if k == n {
		for i := range vals {
			dst = append(dst, int32(i))
		}
		return dst
	}
	copy(work, keys)
	t := kthLargest(work, k)
	for i, key := range keys {
		if key >= t {
			dst = append(dst, int32(i))
		}
	}
	return dst
}

// kthLargest returns the k-th largest of the distinct keys (1 ≤ k ≤ len),
// reordering them (quickselect with a median-of-three pivot).
func kthLargest(a []uint64, k int) uint64 {
	lo, hi, want := 0, len(a)-1, k-1 // want: index in descending order
	for lo < hi {
		mid := lo + (hi-lo)/2
		if a[mid] > a[lo] {
			a[mid], a[lo] = a[lo], a[mid]
		}
		if a[hi] > a[lo] {
			a[hi], a[lo] = a[lo], a[hi]
		}
		if a[hi] > a[mid] {
			a[hi], a[mid] = a[mid], a[hi]
		}
		// a[lo] ≥ a[mid] ≥ a[hi]: the median a[mid] is the pivot.
		p := a[mid]
		i, j := lo, hi
		for i <= j {
			for a[i] > p {
				i++
			}
			for a[j] < p {
				j--
			}
			if i <= j {
				a[i], a[j] = a[j], a[i]
				i++
				j--
			}
		}
		// Now a[lo..j] ≥ p ≥ a[i..hi], and a[j+1..i-1] == p.
		switch {
		case want <= j:
			hi = j
		case want >= i:
			lo = i
		default:
			return a[want]
		}
	}
	return a[want]
}

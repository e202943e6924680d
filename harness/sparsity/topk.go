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
		// Negative values complement all their bits, the others set the
		// sign bit: without a branch on the sign, which predictor scores
		// take at random.
		b := math.Float32bits(v)
		hi = b ^ (uint32(int32(b)>>31) | 0x80000000)
	}
	return uint64(hi)<<32 | uint64(^uint32(i))
}

// topKKeys appends to dst[:0], ascending, the indices of the k values that
// rank first (ranksBefore's order: larger first, ties to the lower index,
// NaN last). scratch must hold at least 2·len(vals) keys. It finds the k-th
// key (kthKey), then collects every index whose key is at least that one in
// a single ascending pass, so no sort is needed; the pass is branch-free
// when dst has room for len(vals) indices.
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
	t := kthKey(keys, work, k)
	if cap(dst) < n {
		// No room for the branch-free pass: append the k kept indices.
		for i, key := range keys {
			if key >= t {
				dst = append(dst, int32(i))
			}
		}
		return dst
	}
	// Branch-free collection: every index is written, and the count moves
	// past it only when it is kept (a kept unit's place is taken at random,
	// so a branch would miss about once per kept unit).
	all := dst[:n]
	c := 0
	for i, key := range keys {
		all[c] = int32(i)
		c += keep(key >= t)
	}
	return all[:c]
}

// keep is 1 for true and 0 for false (the compiler makes it a flag move,
// not a branch).
func keep(b bool) int {
	if b {
		return 1
	}
	return 0
}

// Sampling of kthKey: one key in sampleStride is a sample, used when there
// are at least sampleMin keys.
const (
	sampleStride = 8
	sampleMin    = 512
)

// kthKey returns the k-th largest of the distinct keys (1 ≤ k < len(keys)),
// using work (len(keys) long) and leaving keys as they are. On large inputs
// it first picks, from every sampleStride-th key, a threshold that about
// k·1.5 keys pass (with a margin of three standard deviations and more),
// copies those keys without branching and selects among them; should
// fewer than k pass, it selects among all the keys. Either way the answer
// is exact: the keys at or above any threshold are the largest ones, so
// when at least k pass, the k-th largest is among them.
func kthKey(keys, work []uint64, k int) uint64 {
	n := len(keys)
	if n >= sampleMin && 2*k <= n {
		m := n / sampleStride
		ks := k / sampleStride
		r := ks + ks/2 + 3*int(math.Sqrt(float64(ks))) + 4
		if r <= m {
			for i := range m {
				work[i] = keys[i*sampleStride]
			}
			t0 := kthLargest(work[:m], r)
			c := 0
			for _, key := range keys {
				work[c] = key
				c += keep(key >= t0)
			}
			if c >= k {
				return kthLargest(work[:c], k)
			}
		}
	}
	copy(work, keys)
	return kthLargest(work, k)
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

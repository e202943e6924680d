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
// NaN last). scratch must hold at least 2·len(vals) keys. On large inputs
// it takes the sampled path (topKSampled), which reads every value once;
// otherwise, or should that path find fewer than k candidates, it finds the
// k-th key over all keys and collects every index whose key is at least
// that one in a single ascending pass, so no sort is needed. Either way the
// collection is branch-free when dst has room for every candidate
// (len(vals) always suffices).
func topKKeys(dst []int32, scratch []uint64, vals []float32, k int) []int32 {
	n := len(vals)
	dst = dst[:0]
	if k == 0 {
		return dst
	}
	if k == n {
		for i := range vals {
			dst = append(dst, int32(i))
		}
		return dst
	}
	if out, ok := topKSampled(dst, scratch, vals, k); ok {
		return out
	}
	keys, work := scratch[:n], scratch[n:2*n]
	for i, v := range vals {
		keys[i] = rankKey(v, i)
	}
	copy(work, keys)
	t := kthLargest(work, k)
	return collect(dst, keys, t)
}

// collect appends to dst the index of every key at or above t, in the
// order of keys (each key's index is its complemented low 32 bits). It
// writes without branching when dst has room for all len(keys) indices.
func collect(dst []int32, keys []uint64, t uint64) []int32 {
	if cap(dst) < len(keys) {
		// No room for the branch-free pass: append the kept indices.
		for _, key := range keys {
			if key >= t {
				dst = append(dst, int32(^uint32(key)))
			}
		}
		return dst
	}
	// Branch-free collection: every index is written, and the count moves
	// past it only when it is kept (a kept unit's place is taken at random,
	// so a branch would miss about once per kept unit).
	all := dst[:len(keys)]
	c := 0
	for _, key := range keys {
		all[c] = int32(^uint32(key))
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

// Sampling of topKSampled: one value in sampleStride is a sample, used when
// there are at least sampleMin values.
const (
	sampleStride = 8
	sampleMin    = 512
)

// topKSampled is topKKeys's path for large inputs (at least sampleMin
// values, k at most half of them). From every sampleStride-th value it
// picks a threshold key t0 that about k·1.5 units pass (with a margin of
// three standard deviations and more), and the value f0 of t0's unit. One
// branch-free pass over the values lists, ascending, every unit whose value
// is at least f0 as a float: a superset of the units whose key is at least
// t0, since keys order values as floats do (NaN compares false and ranks
// last; ±0 compare and rank equal). If at least k are listed, the k-th
// largest key is among theirs (the keys at or above any threshold are the
// largest ones), so selecting among the candidates' keys is exact; the
// candidates, already ascending, are then filtered by it. It reports false,
// having kept nothing, when the input is too small or fewer than k units
// pass.
func topKSampled(dst []int32, scratch []uint64, vals []float32, k int) ([]int32, bool) {
	n := len(vals)
	if n < sampleMin || 2*k > n {
		return dst, false
	}
	m := n / sampleStride
	ks := k / sampleStride
	r := ks + ks/2 + 3*int(math.Sqrt(float64(ks))) + 4
	if r > m {
		return dst, false
	}
	sample, cand := scratch[:m], scratch[n:2*n]
	for i := range m {
		sample[i] = rankKey(vals[i*sampleStride], i*sampleStride)
	}
	t0 := kthLargestSpare(sample, scratch[m:2*m], r)
	f0 := vals[^uint32(t0)]
	c := 0
	for i, v := range vals {
		cand[c] = uint64(i)
		c += keep(v >= f0)
	}
	if c < k {
		return dst, false
	}
	cand = cand[:c]
	for j, i := range cand {
		cand[j] = rankKey(vals[i], int(i))
	}
	var t uint64
	if 2*c <= n {
		work := scratch[:c]
		copy(work, cand)
		t = kthLargestSpare(work, scratch[c:2*c], k)
	} else {
		work := scratch[:c]
		copy(work, cand)
		t = kthLargest(work, k)
	}
	return collect(dst, cand, t), true
}

// kthLargestSpare returns the k-th largest of the distinct keys in a
// (1 ≤ k ≤ len(a)), using spare (len(spare) ≥ len(a)) and leaving both in
// any order. It is a quickselect whose partition does not branch on the
// keys: each key is written to both ends of the other buffer and only the
// end it belongs to moves on, so the random comparisons of real scores
// cost no mispredicted branches. Below selectSmall keys it finishes with
// kthLargest.
func kthLargestSpare(a, spare []uint64, k int) uint64 {
	src, dst := a, spare[:len(a)]
	for len(src) > selectSmall {
		n := len(src)
		x, y, z := src[0], src[n/2], src[n-1]
		p := max(min(x, y), min(max(x, y), z)) // the median of the three
		hi, lo := 0, n-1
		for _, v := range src {
			dst[hi] = v
			dst[lo] = v
			hi += keep(v > p)
			lo -= keep(v < p)
		}
		// Keys are distinct: exactly one equals p, and hi == lo is its place.
		switch want := k - 1; {
		case want < hi:
			src, dst = dst[:hi], src[:hi]
		case want == hi:
			return p
		default:
			k -= hi + 1
			src, dst = dst[hi+1:], src[:n-hi-1]
		}
	}
	return kthLargest(src, k)
}

// selectSmall is the size below which kthLargestSpare hands over to
// kthLargest.
const selectSmall = 32

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

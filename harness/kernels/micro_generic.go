package kernels

import "math"

// This file holds the hot inner loops in portable Go; the GEMM micro-kernel
// lives in tile_*.go (Go, and AVX2 assembly on amd64). Every loop keeps the
// per-element order of the determinism contract: products rounded to
// float32 (the explicit conversion forbids fusion into an FMA), added in
// ascending k to a single accumulator per output element.

// dotAcc returns acc + Σ x[k]·w[k] over k < len(x), added in ascending k.
// len(w) >= len(x).
func dotAcc(acc float32, x, w []float32) float32 {
	w = w[:len(x)]
	for k, v := range x {
		acc += float32(v * w[k])
	}
	return acc
}

// dot4Acc continues four independent dot-product chains, one per row
// w0…w3, over the same x (each len >= len(x)), in ascending k.
func dot4Acc(acc *[4]float32, x, w0, w1, w2, w3 []float32) {
	n := len(x)
	w0, w1, w2, w3 = w0[:n], w1[:n], w2[:n], w3[:n]
	s0, s1, s2, s3 := acc[0], acc[1], acc[2], acc[3]
	for k, v := range x {
		s0 += float32(v * w0[k])
		s1 += float32(v * w1[k])
		s2 += float32(v * w2[k])
		s3 += float32(v * w3[k])
	}
	acc[0], acc[1], acc[2], acc[3] = s0, s1, s2, s3
}

// axpyGo does y[j] += alpha·x[j] (product rounded, then added) for
// j < len(y); len(x) >= len(y). It is axpyAcc's portable twin.
func axpyGo(alpha float32, x, y []float32) {
	x = x[:len(y)]
	for j, v := range x {
		y[j] += float32(alpha * v)
	}
}

// axpyF16Go does y[j] += alpha·float32(x[j]) for the binary16 x (each
// value widened exactly, the product rounded, then added) for j < len(y);
// len(x) >= len(y). It is axpyF16Acc's portable twin.
func axpyF16Go(alpha float32, x []uint16, y []float32) {
	x = x[:len(y)]
	for j, h := range x {
		y[j] += float32(alpha * F16Value(h))
	}
}

// f16ToF32Go converts binary16 bit patterns; len(dst) == len(src). It is
// f16ToF32Slice's portable twin.
func f16ToF32Go(dst []float32, src []uint16) {
	dst = dst[:len(src)]
	for i, h := range src {
		exp := h & 0x7c00
		if exp != 0 && exp != 0x7c00 {
			// Normal number: rebias the exponent (15 → 127) and widen.
			b := uint32(h&0x8000)<<16 | (uint32(h&0x7fff)+(112<<10))<<13
			dst[i] = math.Float32frombits(b)
			continue
		}
		dst[i] = F16Value(h)
	}
}

// bf16ToF32Go converts bfloat16 bit patterns; len(dst) == len(src). It is
// the portable body of bf16ToF32Slice.
func bf16ToF32Go(dst []float32, src []uint16) {
	dst = dst[:len(src)]
	for i, h := range src {
		dst[i] = math.Float32frombits(uint32(h) << 16)
	}
}

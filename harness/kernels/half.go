package kernels

import "math"

// F16ToF32 converts IEEE 754 binary16 bit patterns to float32, exactly
// (every binary16 value is representable). NaN payloads are kept.
// len(dst) must equal len(src).
func F16ToF32(dst []float32, src []uint16) {
	if len(dst) != len(src) {
		panic(msgConvLen)
	}
	f16ToF32Slice(dst, src)
}

// BF16ToF32 converts bfloat16 bit patterns to float32, exactly.
// len(dst) must equal len(src).
func BF16ToF32(dst []float32, src []uint16) {
	if len(dst) != len(src) {
		panic(msgConvLen)
	}
	bf16ToF32Slice(dst, src)
}

// F32ToF16 converts float32 values to IEEE 754 binary16 bit patterns,
// rounding to nearest with ties to even; values too large become ±Inf,
// results below the normal range become subnormals or signed zero, and NaN
// stays NaN. len(dst) must equal len(src).
func F32ToF16(dst []uint16, src []float32) {
	if len(dst) != len(src) {
		panic(msgConvLen)
	}
	for i, f := range src {
		dst[i] = F16Bits(f)
	}
}

// F32ToBF16 converts float32 values to bfloat16 bit patterns, rounding to
// nearest with ties to even; NaN stays NaN. len(dst) must equal len(src).
func F32ToBF16(dst []uint16, src []float32) {
	if len(dst) != len(src) {
		panic(msgConvLen)
	}
	for i, f := range src {
		dst[i] = BF16Bits(f)
	}
}

// F16Value returns the float32 value of the binary16 bit pattern h.
func F16Value(h uint16) float32 {
	sign := uint32(h&0x8000) << 16
	exp := uint32(h>>10) & 0x1f
	mant := uint32(h & 0x3ff)
	switch exp {
	case 0:
		// Zero or subnormal: mant · 2^-24, exact in float32.
		v := float32(mant) * (1.0 / (1 << 24))
		return math.Float32frombits(math.Float32bits(v) | sign)
	case 0x1f:
		// Inf or NaN; the payload moves to the top of the float32 mantissa.
		return math.Float32frombits(sign | 0x7f800000 | mant<<13)
	}
	return math.Float32frombits(sign | (exp+(127-15))<<23 | mant<<13)
}

// F16Bits returns the binary16 bit pattern nearest to f (ties to even,
// overflow to ±Inf, NaN stays NaN).
func F16Bits(f float32) uint16 {
	b := math.Float32bits(f)
	sign := uint16(b>>16) & 0x8000
	exp := int(b>>23) & 0xff
	mant := b & 0x7fffff
	if exp == 0xff {
		if mant == 0 {
			return sign | 0x7c00
		}
		m := uint16(mant >> 13)
		if m == 0 {
			m = 0x200 // payload only in the low bits: keep it a (quiet) NaN
		}
		return sign | 0x7c00 | m
	}
	e := exp - 127 // unbiased exponent; float32 subnormals give -127 and round to zero below
	if e > 15 {
		return sign | 0x7c00
	}
	if e >= -14 {
		// Normal binary16 range; a carry out of the mantissa bumps the
		// exponent, and out of exponent 30 it yields Inf (0x7c00).
		h := uint32(e+15)<<10 | mant>>13
		rem := mant & 0x1fff
		if rem > 0x1000 || (rem == 0x1000 && h&1 == 1) {
			h++
		}
		return sign | uint16(h)
	}
	// Subnormal binary16: value / 2^-24 = M · 2^(e+1), M = 1.mant as an integer.
	shift := uint(-e - 1) // 14 … for e = -15
	if shift > 24 {
		return sign
	}
	m := mant | 0x800000
	h := m >> shift
	rem := m & (1<<shift - 1)
	half := uint32(1) << (shift - 1)
	if rem > half || (rem == half && h&1 == 1) {
		h++
	}
	return sign | uint16(h)
}

// BF16Value returns the float32 value of the bfloat16 bit pattern h.
func BF16Value(h uint16) float32 {
	return math.Float32frombits(uint32(h) << 16)
}

// BF16Bits returns the bfloat16 bit pattern nearest to f (ties to even,
// overflow to ±Inf, NaN stays NaN).
func BF16Bits(f float32) uint16 {
	b := math.Float32bits(f)
	if b&0x7fffffff > 0x7f800000 {
		return uint16(b>>16) | 0x0040 // NaN: keep sign and top payload, force quiet
	}
	b += 0x7fff + (b>>16)&1
	return uint16(b >> 16)
}

package kernels

import "strconv"

// DType is the storage type of a weight matrix.
type DType uint8

const (
	// F32 is IEEE 754 binary32.
	F32 DType = iota
	// F16 is IEEE 754 binary16, stored as raw bit patterns.
	F16
	// BF16 is bfloat16 (the upper half of a binary32), stored as raw bit patterns.
	BF16
)

// String returns "F32", "F16" or "BF16", or "DType(n)" for an unknown value.
func (d DType) String() string {
	switch d {
	case F32:
		return "F32"
	case F16:
		return "F16"
	case BF16:
		return "BF16"
	}
	return "DType(" + strconv.Itoa(int(d)) + ")"
}

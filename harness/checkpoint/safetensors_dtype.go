package checkpoint

// DType is a safetensors element type name, e.g. "F32", as listed by the
// safetensors format specification.
type DType string

// The element types of the safetensors format specification (list written
// from memory of the specification). All are little-endian.
const (
	BOOL   DType = "BOOL"    // BOOL is a one-byte boolean.
	U8     DType = "U8"      // U8 is an unsigned 8-bit integer.
	I8     DType = "I8"      // I8 is a signed 8-bit integer.
	F8E4M3 DType = "F8_E4M3" // F8E4M3 is an 8-bit float with 4 exponent and 3 mantissa bits.
	F8E5M2 DType = "F8_E5M2" // F8E5M2 is an 8-bit float with 5 exponent and 2 mantissa bits.
	I16    DType = "I16"     // I16 is a signed 16-bit integer.
	U16    DType = "U16"     // U16 is an unsigned 16-bit integer.
	F16    DType = "F16"     // F16 is an IEEE 754 binary16 float.
	BF16   DType = "BF16"    // BF16 is a bfloat16 float (the top half of a binary32).
	I32    DType = "I32"     // I32 is a signed 32-bit integer.
	U32    DType = "U32"     // U32 is an unsigned 32-bit integer.
	F32    DType = "F32"     // F32 is an IEEE 754 binary32 float.
	F64    DType = "F64"     // F64 is an IEEE 754 binary64 float.
	I64    DType = "I64"     // I64 is a signed 64-bit integer.
	U64    DType = "U64"     // U64 is an unsigned 64-bit integer.
)

// Size returns the number of bytes per element of d, or 0 when d is not a
// dtype of the safetensors format specification.
func (d DType) Size() int {
	switch d {
	case BOOL, U8, I8, F8E4M3, F8E5M2:
		return 1
	case I16, U16, F16, BF16:
		return 2
	case I32, U32, F32:
		return 4
	case F64, I64, U64:
		return 8
	}
	return 0
}

// dtypeList is the spelled-out list used in error messages.
const dtypeList = "BOOL, U8, I8, F8_E4M3, F8_E5M2, I16, U16, F16, BF16, I32, U32, F32, F64, I64, U64"

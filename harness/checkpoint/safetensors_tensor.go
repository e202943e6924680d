package checkpoint

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"
	"unsafe"

	"golang.org/x/sys/unix"
)

// Tensor is one named tensor of an open File: its dtype, shape and bytes.
// The bytes are a view into the memory-mapped file, valid until the owning
// File is closed, and must not be modified.
type Tensor struct {
	// Name is the tensor's name in the header.
	Name string
	// DType is the element type.
	DType DType
	// Shape lists the dimensions; empty for a scalar.
	Shape []int
	// File is the path of the file the tensor came from.
	File string
	// Offset is the absolute byte offset of the tensor's data in File.
	Offset int64

	data []byte
}

// Bytes returns the tensor's raw little-endian bytes (read-only; nil after
// the owning File is closed).
func (t *Tensor) Bytes() []byte { return t.data }

// Len returns the number of elements: the product of Shape (1 for a scalar).
func (t *Tensor) Len() int {
	n := 1
	for _, d := range t.Shape {
		n *= d
	}
	return n
}

// Float32s returns the elements of an F32 tensor. On a little-endian host
// with 4-byte-aligned data the result is a zero-copy view into the mapped
// file that must not be modified; otherwise it is a decoded copy. Any other
// dtype is an error.
func (t *Tensor) Float32s() ([]float32, error) {
	if t.DType != F32 {
		return nil, fmt.Errorf("%s: tensor %q is %s, not F32; convert it or read it with the matching accessor", t.File, t.Name, t.DType)
	}
	b := t.data
	n := len(b) / 4
	if n == 0 {
		return []float32{}, nil
	}
	if hostLittleEndian() && uintptr(unsafe.Pointer(&b[0]))%4 == 0 {
		return unsafe.Slice((*float32)(unsafe.Pointer(&b[0])), n), nil
	}
	out := make([]float32, n)
	for i := range out {
		out[i] = math.Float32frombits(binary.LittleEndian.Uint32(b[4*i:]))
	}
	return out, nil
}

// Uint16s returns the raw half words of an F16 or BF16 tensor. On a
// little-endian host with 2-byte-aligned data the result is a zero-copy view
// into the mapped file that must not be modified; otherwise it is a decoded
// copy. Any other dtype is an error.
func (t *Tensor) Uint16s() ([]uint16, error) {
	if t.DType != F16 && t.DType != BF16 {
		return nil, fmt.Errorf("%s: tensor %q is %s, not F16 or BF16; read it with the matching accessor", t.File, t.Name, t.DType)
	}
	b := t.data
	n := len(b) / 2
	if n == 0 {
		return []uint16{}, nil
	}
	if hostLittleEndian() && uintptr(unsafe.Pointer(&b[0]))%2 == 0 {
		return unsafe.Slice((*uint16)(unsafe.Pointer(&b[0])), n), nil
	}
	out := make([]uint16, n)
	for i := range out {
		out[i] = binary.LittleEndian.Uint16(b[2*i:])
	}
	return out, nil
}

// NonFinite counts the NaN and ±Inf elements by bit pattern (an exponent
// field of all ones), without converting, and returns the index of the first
// one or -1. It handles F32, F16 and BF16 as well as F64 and the two 8-bit
// float types (F8_E5M2 has IEEE-style Inf/NaN; F8_E4M3, the "fn" variant,
// has no Inf and only the NaN pattern S.1111.111 — from memory of the
// formats). Other dtypes cannot hold non-finite values: (0, -1).
func (t *Tensor) NonFinite() (count int, first int) {
	first = -1
	b := t.data
	note := func(i int) {
		if count == 0 {
			first = i
		}
		count++
	}
	switch t.DType {
	case F32:
		for i := 0; i+4 <= len(b); i += 4 {
			if binary.LittleEndian.Uint32(b[i:])&0x7f800000 == 0x7f800000 {
				note(i / 4)
			}
		}
	case F16:
		for i := 0; i+2 <= len(b); i += 2 {
			if binary.LittleEndian.Uint16(b[i:])&0x7c00 == 0x7c00 {
				note(i / 2)
			}
		}
	case BF16:
		for i := 0; i+2 <= len(b); i += 2 {
			if binary.LittleEndian.Uint16(b[i:])&0x7f80 == 0x7f80 {
				note(i / 2)
			}
		}
	case F64:
		for i := 0; i+8 <= len(b); i += 8 {
			if binary.LittleEndian.Uint64(b[i:])&0x7ff0000000000000 == 0x7ff0000000000000 {
				note(i / 8)
			}
		}
	case F8E5M2:
		for i, v := range b {
			if v&0x7c == 0x7c {
				note(i)
			}
		}
	case F8E4M3:
		for i, v := range b {
			if v&0x7f == 0x7f {
				note(i)
			}
		}
	}
	return count, first
}

// hostLittleEndian reports whether the host stores integers little-endian,
// the byte order of the safetensors format, so that views need no swapping.
func hostLittleEndian() bool {
	x := uint16(1)
	return *(*byte)(unsafe.Pointer(&x)) == 1
}

// Release tells the operating system that the tensor's bytes are not needed
// for now (madvise MADV_DONTNEED on the whole pages inside them): the
// process's resident memory drops by about their size, and a later read
// brings the pages back from the file, unchanged (the mapping is read-only
// and shared, so nothing is lost). The engine calls it after copying a
// matrix into its panel layout. Errors are ignored: it is only advice.
func (t *Tensor) Release() {
	d := t.data
	if len(d) == 0 {
		return
	}
	page := os.Getpagesize()
	start := int(uintptr(unsafe.Pointer(&d[0])) % uintptr(page))
	lo := (page - start) % page        // first whole page inside d
	hi := len(d) - (start+len(d))%page // end of the last whole page
	if hi-lo < page {
		return
	}
	_ = unix.Madvise(d[lo:hi], unix.MADV_DONTNEED)
}

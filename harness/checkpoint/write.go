package checkpoint

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"sort"
	"unicode/utf8"

	"sparsegate/harness/atomicfile"
)

// NamedTensor is one tensor to write: name, dtype, shape and its raw
// little-endian bytes.
type NamedTensor struct {
	Name  string
	DType DType
	Shape []int
	Data  []byte
}

// Write writes tensors and metadata to a safetensors file at path. Tensors
// are laid out contiguously in the given order, JSON keys follow the same
// order after "__metadata__" (whose keys are sorted), and the header is
// padded with spaces so the data start 8-byte aligned, as the safetensors
// format specification recommends. Names must be unique, non-empty, valid
// UTF-8 and not "__metadata__"; each tensor's shape times its dtype size must
// equal len(Data).
//
// The write is atomic: the bytes go to a temporary file in the target
// directory that is synced and renamed over path, and the directory is then
// synced. On any error the temporary file is removed and an existing file at
// path is left untouched. The new file has mode 0644.
func Write(path string, tensors []NamedTensor, metadata map[string]string) error {
	infos, err := layoutTensors(path, tensors)
	if err != nil {
		return err
	}
	prefix, err := encodeHeader(path, infos, metadata)
	if err != nil {
		return err
	}
	return writeAtomic(path, func(f io.Writer) error {
		if _, err := f.Write(prefix); err != nil {
			return err
		}
		for _, t := range tensors {
			if _, err := f.Write(t.Data); err != nil {
				return err
			}
		}
		return nil
	})
}

// layoutTensors validates tensors and assigns contiguous data offsets in
// the given order.
func layoutTensors(path string, tensors []NamedTensor) ([]TensorInfo, error) {
	infos := make([]TensorInfo, len(tensors))
	seen := make(map[string]bool, len(tensors))
	var pos int64
	for i, t := range tensors {
		switch {
		case t.Name == "":
			return nil, fmt.Errorf("%s: tensor %d has an empty name; give every tensor a name", path, i)
		case t.Name == metadataKey:
			return nil, fmt.Errorf("%s: tensor %d is named %q, which the format reserves; rename it", path, i, metadataKey)
		case !utf8.ValidString(t.Name):
			return nil, fmt.Errorf("%s: tensor %d: name %q is not valid UTF-8; rename it", path, i, t.Name)
		case seen[t.Name]:
			return nil, fmt.Errorf("%s: tensor %q appears twice; tensor names must be unique", path, t.Name)
		case t.DType.Size() == 0:
			return nil, fmt.Errorf("%s: tensor %q: unknown dtype %q (known: %s)", path, t.Name, t.DType, dtypeList)
		}
		seen[t.Name] = true
		for j, d := range t.Shape {
			if d < 0 {
				return nil, fmt.Errorf("%s: tensor %q: shape entry %d is %d, must be non-negative", path, t.Name, j, d)
			}
		}
		need, ok := byteSize(t.DType, t.Shape)
		if !ok || need != uint64(len(t.Data)) {
			return nil, fmt.Errorf("%s: tensor %q: shape %v of %s needs %d bytes (overflow: %v) but Data holds %d; fix the shape or the data",
				path, t.Name, t.Shape, t.DType, need, !ok, len(t.Data))
		}
		infos[i] = TensorInfo{
			Name:  t.Name,
			DType: t.DType,
			Shape: append([]int{}, t.Shape...),
			Begin: pos,
			End:   pos + int64(len(t.Data)),
		}
		pos += int64(len(t.Data))
	}
	return infos, nil
}

// encodeHeader returns the length prefix and the space-padded JSON header
// for infos, whose offsets must already be laid out. Key order: the metadata
// (keys sorted) first, then the tensors in the order given.
func encodeHeader(path string, infos []TensorInfo, metadata map[string]string) ([]byte, error) {
	var js bytes.Buffer
	js.WriteByte('{')
	first := true
	comma := func() {
		if !first {
			js.WriteByte(',')
		}
		first = false
	}
	if metadata != nil {
		keys := make([]string, 0, len(metadata))
		for k, v := range metadata {
			if !utf8.ValidString(k) || !utf8.ValidString(v) {
				return nil, fmt.Errorf("%s: metadata entry %q is not valid UTF-8; fix the metadata", path, k)
			}
			keys = append(keys, k)
		}
		sort.Strings(keys)
		comma()
		appendJSONString(&js, metadataKey)
		js.WriteString(":{")
		for i, k := range keys {
			if i > 0 {
				js.WriteByte(',')
			}
			appendJSONString(&js, k)
			js.WriteByte(':')
			appendJSONString(&js, metadata[k])
		}
		js.WriteByte('}')
	}
	for _, t := range infos {
		comma()
		appendJSONString(&js, t.Name)
		js.WriteString(`:{"dtype":`)
		appendJSONString(&js, string(t.DType))
		js.WriteString(`,"shape":[`)
		for i, d := range t.Shape {
			if i > 0 {
				js.WriteByte(',')
			}
			fmt.Fprintf(&js, "%d", d)
		}
		fmt.Fprintf(&js, `],"data_offsets":[%d,%d]}`, t.Begin, t.End)
	}
	js.WriteByte('}')
	for (8+js.Len())%8 != 0 {
		js.WriteByte(' ')
	}
	if js.Len() > MaxHeaderBytes {
		return nil, fmt.Errorf("%s: header would be %d bytes, over the %d-byte limit readers accept; write fewer tensors per file", path, js.Len(), MaxHeaderBytes)
	}
	out := make([]byte, 8, 8+js.Len())
	binary.LittleEndian.PutUint64(out, uint64(js.Len()))
	return append(out, js.Bytes()...), nil
}

// appendJSONString appends s as a JSON string literal, without HTML escaping.
func appendJSONString(buf *bytes.Buffer, s string) {
	enc := json.NewEncoder(buf)
	enc.SetEscapeHTML(false)
	_ = enc.Encode(s)           // encoding a string into a bytes.Buffer cannot fail
	buf.Truncate(buf.Len() - 1) // drop the Encoder's newline
}

// writeAtomic writes path through atomicfile, with the package's prefix.
func writeAtomic(path string, fill func(io.Writer) error) error {
	if err := atomicfile.Write(path, fill); err != nil {
		return fmt.Errorf("checkpoint: %w", err)
	}
	return nil
}

// EncodeF32 returns v as little-endian bytes, the F32 layout.
func EncodeF32(v []float32) []byte {
	out := make([]byte, 4*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint32(out[4*i:], math.Float32bits(x))
	}
	return out
}

// EncodeU16 returns v as little-endian bytes: the raw half-word layout of
// F16 and BF16 (callers convert from float32 themselves).
func EncodeU16(v []uint16) []byte {
	out := make([]byte, 2*len(v))
	for i, x := range v {
		binary.LittleEndian.PutUint16(out[2*i:], x)
	}
	return out
}

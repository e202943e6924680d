package checkpoint

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"math/bits"
	"sort"
	"strconv"
	"unicode/utf8"
)

// MaxHeaderBytes is the largest JSON header ParseHeader accepts (100 MiB).
// A length prefix above it is refused before anything is allocated. The cap
// is this package's choice (real headers are kilobytes to a few MiB).
const MaxHeaderBytes = 100 << 20

// metadataKey is the reserved header key holding the string metadata.
const metadataKey = "__metadata__"

// hintDamaged is the advice appended to header errors.
const hintDamaged = "the file is damaged or not a safetensors file; re-download or re-export it"

// Header is a parsed and validated safetensors header.
type Header struct {
	// Tensors lists every tensor, sorted by Begin offset (ties: End, then Name).
	Tensors []TensorInfo
	// Metadata holds the "__metadata__" strings; nil when the header has none.
	Metadata map[string]string
	// DataStart is the absolute file offset of the byte buffer (8 + N).
	DataStart int64
}

// TensorInfo is one header entry. Begin and End are the data_offsets,
// relative to DataStart.
type TensorInfo struct {
	Name  string
	DType DType
	Shape []int
	Begin int64
	End   int64
}

// ParseHeader parses and validates the header of a safetensors file whose
// total size is fileSize. prefix must hold at least the first 8+N bytes of
// the file (the length prefix and the JSON header); extra bytes are ignored.
// name is used in error messages only. Every span is checked against the
// buffer of fileSize-8-N bytes: spans must cover it exactly, without holes
// or overlaps, as the safetensors format specification requires.
func ParseHeader(name string, prefix []byte, fileSize int64) (*Header, error) {
	if fileSize < 8 {
		return nil, fmt.Errorf("%s: file is %d bytes, shorter than the 8-byte safetensors length prefix; %s", name, fileSize, hintDamaged)
	}
	if len(prefix) < 8 {
		return nil, fmt.Errorf("%s: only %d bytes of the file given, need the 8-byte safetensors length prefix", name, len(prefix))
	}
	n := binary.LittleEndian.Uint64(prefix)
	if n > MaxHeaderBytes {
		return nil, fmt.Errorf("%s: safetensors header length %d exceeds the %d-byte limit; %s", name, n, MaxHeaderBytes, hintDamaged)
	}
	if n > uint64(fileSize-8) {
		return nil, fmt.Errorf("%s: safetensors header length %d runs past the end of the %d-byte file; the file is truncated or damaged, re-download or re-export it", name, n, fileSize)
	}
	if uint64(len(prefix)-8) < n {
		return nil, fmt.Errorf("%s: only %d bytes of the file given, the safetensors header needs %d", name, len(prefix), 8+n)
	}
	js := prefix[8 : 8+n]
	if !utf8.Valid(js) {
		return nil, fmt.Errorf("%s: safetensors header is not valid UTF-8 (first bad byte at file offset %d); %s", name, 8+firstInvalidUTF8(js), hintDamaged)
	}
	p := headerParser{name: name, dec: json.NewDecoder(bytes.NewReader(js))}
	p.dec.UseNumber()
	h, err := p.parse()
	if err != nil {
		return nil, err
	}
	h.DataStart = 8 + int64(n)
	if err := checkSpans(name, h.Tensors, fileSize-h.DataStart); err != nil {
		return nil, err
	}
	return h, nil
}

// firstInvalidUTF8 returns the index of the first byte of b that does not
// start a valid UTF-8 sequence.
func firstInvalidUTF8(b []byte) int {
	for i := 0; i < len(b); {
		r, size := utf8.DecodeRune(b[i:])
		if r == utf8.RuneError && size == 1 {
			return i
		}
		i += size
	}
	return len(b)
}

// headerParser walks the header JSON token by token, which (unlike
// json.Unmarshal) lets it refuse duplicate keys and unknown fields.
type headerParser struct {
	name string
	dec  *json.Decoder
}

// fail formats a header error that names the file and the byte offset.
func (p *headerParser) fail(format string, args ...any) error {
	return fmt.Errorf("%s: safetensors header near file offset %d: %s; %s",
		p.name, 8+p.dec.InputOffset(), fmt.Sprintf(format, args...), hintDamaged)
}

// token reads the next token, turning a JSON error into a located one.
func (p *headerParser) token() (json.Token, error) {
	tok, err := p.dec.Token()
	if err == io.EOF {
		return nil, p.fail("header is not valid JSON: it ends early")
	}
	if err != nil {
		var se *json.SyntaxError
		if errors.As(err, &se) {
			return nil, fmt.Errorf("%s: safetensors header is not valid JSON at file offset %d: %w; %s", p.name, 8+se.Offset, err, hintDamaged)
		}
		return nil, p.fail("header is not valid JSON: %v", err)
	}
	return tok, nil
}

// delim reads a token that must be the delimiter want.
func (p *headerParser) delim(want json.Delim, what string) error {
	tok, err := p.token()
	if err != nil {
		return err
	}
	if d, ok := tok.(json.Delim); !ok || d != want {
		return p.fail("%s must be a JSON %s, found %s", what, delimKind(want), describeToken(tok))
	}
	return nil
}

// key reads an object key.
func (p *headerParser) key() (string, error) {
	tok, err := p.token()
	if err != nil {
		return "", err
	}
	s, ok := tok.(string)
	if !ok {
		return "", p.fail("expected an object key, found %s", describeToken(tok))
	}
	return s, nil
}

// parse reads the whole header object.
func (p *headerParser) parse() (*Header, error) {
	if err := p.delim('{', "the header"); err != nil {
		return nil, err
	}
	h := &Header{}
	seen := map[string]bool{}
	for p.dec.More() {
		k, err := p.key()
		if err != nil {
			return nil, err
		}
		if seen[k] {
			if k == metadataKey {
				return nil, p.fail("%q appears twice", k)
			}
			return nil, p.fail("tensor %q appears twice", k)
		}
		seen[k] = true
		if k == metadataKey {
			if h.Metadata, err = p.metadata(); err != nil {
				return nil, err
			}
			continue
		}
		info, err := p.entry(k)
		if err != nil {
			return nil, err
		}
		h.Tensors = append(h.Tensors, info)
	}
	if err := p.delim('}', "the header"); err != nil {
		return nil, err
	}
	if tok, err := p.dec.Token(); err != io.EOF {
		if err != nil {
			return nil, p.fail("unexpected bytes after the header object: %v", err)
		}
		return nil, p.fail("unexpected %s after the header object", describeToken(tok))
	}
	sort.Slice(h.Tensors, func(i, j int) bool {
		a, b := h.Tensors[i], h.Tensors[j]
		if a.Begin != b.Begin {
			return a.Begin < b.Begin
		}
		if a.End != b.End {
			return a.End < b.End
		}
		return a.Name < b.Name
	})
	return h, nil
}

// metadata reads the "__metadata__" object; every value must be a string.
func (p *headerParser) metadata() (map[string]string, error) {
	if err := p.delim('{', metadataKey); err != nil {
		return nil, err
	}
	md := map[string]string{}
	for p.dec.More() {
		k, err := p.key()
		if err != nil {
			return nil, err
		}
		if _, dup := md[k]; dup {
			return nil, p.fail("%s key %q appears twice", metadataKey, k)
		}
		tok, err := p.token()
		if err != nil {
			return nil, err
		}
		v, ok := tok.(string)
		if !ok {
			return nil, p.fail("%s value for %q must be a string, found %s", metadataKey, k, describeToken(tok))
		}
		md[k] = v
	}
	if err := p.delim('}', metadataKey); err != nil {
		return nil, err
	}
	return md, nil
}

// entry reads one tensor entry and checks it on its own.
func (p *headerParser) entry(name string) (TensorInfo, error) {
	info := TensorInfo{Name: name}
	if name == "" {
		return info, p.fail("a tensor has an empty name")
	}
	if err := p.delim('{', fmt.Sprintf("tensor %q", name)); err != nil {
		return info, err
	}
	var haveDType, haveShape, haveOffsets bool
	for p.dec.More() {
		k, err := p.key()
		if err != nil {
			return info, err
		}
		switch k {
		case "dtype":
			if haveDType {
				return info, p.fail("tensor %q: field \"dtype\" appears twice", name)
			}
			haveDType = true
			tok, err := p.token()
			if err != nil {
				return info, err
			}
			s, ok := tok.(string)
			if !ok {
				return info, p.fail("tensor %q: dtype must be a string, found %s", name, describeToken(tok))
			}
			info.DType = DType(s)
			if info.DType.Size() == 0 {
				return info, p.fail("tensor %q: unknown dtype %q (known: %s)", name, s, dtypeList)
			}
		case "shape":
			if haveShape {
				return info, p.fail("tensor %q: field \"shape\" appears twice", name)
			}
			haveShape = true
			dims, err := p.ints(name, "shape")
			if err != nil {
				return info, err
			}
			info.Shape = make([]int, len(dims))
			for i, d := range dims {
				if d < 0 || d > math.MaxInt {
					return info, p.fail("tensor %q: shape entry %d is %d, must be a non-negative integer", name, i, d)
				}
				info.Shape[i] = int(d)
			}
		case "data_offsets":
			if haveOffsets {
				return info, p.fail("tensor %q: field \"data_offsets\" appears twice", name)
			}
			haveOffsets = true
			offs, err := p.ints(name, "data_offsets")
			if err != nil {
				return info, err
			}
			if len(offs) != 2 {
				return info, p.fail("tensor %q: data_offsets must be [begin, end], found %d numbers", name, len(offs))
			}
			if offs[0] < 0 || offs[1] < 0 {
				return info, p.fail("tensor %q: data_offsets %v must not be negative", name, offs)
			}
			info.Begin, info.End = offs[0], offs[1]
		default:
			return info, p.fail("tensor %q: unknown field %q (allowed: dtype, shape, data_offsets)", name, k)
		}
	}
	if err := p.delim('}', fmt.Sprintf("tensor %q", name)); err != nil {
		return info, err
	}
	switch {
	case !haveDType:
		return info, p.fail("tensor %q: field \"dtype\" is missing", name)
	case !haveShape:
		return info, p.fail("tensor %q: field \"shape\" is missing", name)
	case !haveOffsets:
		return info, p.fail("tensor %q: field \"data_offsets\" is missing", name)
	}
	if info.Begin > info.End {
		return info, p.fail("tensor %q: data_offsets begin %d is after end %d", name, info.Begin, info.End)
	}
	need, ok := byteSize(info.DType, info.Shape)
	if !ok {
		return info, p.fail("tensor %q: shape %v of %s overflows a 64-bit byte count", name, info.Shape, info.DType)
	}
	if need != uint64(info.End-info.Begin) {
		return info, p.fail("tensor %q: shape %v of %s needs %d bytes but data_offsets [%d, %d] span %d",
			name, info.Shape, info.DType, need, info.Begin, info.End, info.End-info.Begin)
	}
	return info, nil
}

// ints reads a JSON array of integers.
func (p *headerParser) ints(name, field string) ([]int64, error) {
	if err := p.delim('[', fmt.Sprintf("tensor %q: %s", name, field)); err != nil {
		return nil, err
	}
	var out []int64
	for p.dec.More() {
		tok, err := p.token()
		if err != nil {
			return nil, err
		}
		num, ok := tok.(json.Number)
		if !ok {
			return nil, p.fail("tensor %q: %s entry %d must be an integer, found %s", name, field, len(out), describeToken(tok))
		}
		v, err := strconv.ParseInt(string(num), 10, 64)
		if err != nil {
			if errors.Is(err, strconv.ErrRange) {
				return nil, p.fail("tensor %q: %s entry %d (%s) is too large", name, field, len(out), num)
			}
			return nil, p.fail("tensor %q: %s entry %d (%s) must be an integer", name, field, len(out), num)
		}
		out = append(out, v)
	}
	if err := p.delim(']', fmt.Sprintf("tensor %q: %s", name, field)); err != nil {
		return nil, err
	}
	return out, nil
}

// byteSize returns the product of shape times the element size of d, and
// false when it does not fit in an int64.
func byteSize(d DType, shape []int) (uint64, bool) {
	total := uint64(d.Size())
	for _, s := range shape {
		hi, lo := bits.Mul64(total, uint64(s))
		if hi != 0 || lo > math.MaxInt64 {
			return 0, false
		}
		total = lo
	}
	return total, true
}

// checkSpans verifies that the sorted spans tile [0, bufLen) exactly.
func checkSpans(name string, ts []TensorInfo, bufLen int64) error {
	for _, t := range ts {
		if t.End > bufLen {
			return fmt.Errorf("%s: tensor %q: data_offsets [%d, %d] run past the end of the %d-byte data buffer; the file is truncated or damaged, re-download or re-export it",
				name, t.Name, t.Begin, t.End, bufLen)
		}
	}
	var pos int64
	prev := ""
	for _, t := range ts {
		if t.Begin < pos {
			return fmt.Errorf("%s: tensor %q: data_offsets [%d, %d] overlap tensor %q, which ends at %d; %s",
				name, t.Name, t.Begin, t.End, prev, pos, hintDamaged)
		}
		if t.Begin > pos {
			return fmt.Errorf("%s: tensor %q: data_offsets [%d, %d] leave bytes [%d, %d) of the data buffer unused (the buffer must be covered without holes); %s",
				name, t.Name, t.Begin, t.End, pos, t.Begin, hintDamaged)
		}
		pos, prev = t.End, t.Name
	}
	if pos != bufLen {
		return fmt.Errorf("%s: data buffer is %d bytes but its tensors cover only [0, %d) (the buffer must be covered without holes); %s",
			name, bufLen, pos, hintDamaged)
	}
	return nil
}

// delimKind names a JSON delimiter for messages.
func delimKind(d json.Delim) string {
	switch d {
	case '{', '}':
		return "object"
	}
	return "array"
}

// describeToken names a JSON token for messages.
func describeToken(tok json.Token) string {
	switch v := tok.(type) {
	case nil:
		return "null"
	case json.Delim:
		switch v {
		case '{':
			return "an object"
		case '[':
			return "an array"
		}
		return fmt.Sprintf("%q", string(v))
	case string:
		return fmt.Sprintf("the string %q", v)
	case json.Number:
		return "the number " + string(v)
	case bool:
		return fmt.Sprintf("%v", v)
	}
	return fmt.Sprintf("%v", tok)
}

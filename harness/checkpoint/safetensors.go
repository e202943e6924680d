package checkpoint

import (
	"encoding/binary"
	"fmt"
	"math"
	"os"

	"golang.org/x/sys/unix"
)

// File is an open, validated, read-only memory-mapped safetensors file.
// Its tensors' bytes are views into the mapping: they are valid until Close
// and must not be written to. Truncating the file on disk while it is open
// makes later reads of the lost pages fault (an operating-system property of
// memory maps), so checkpoints must not be rewritten in place while in use.
type File struct {
	path     string
	data     []byte
	tensors  []*Tensor
	byName   map[string]*Tensor
	metadata map[string]string
}

// Open memory-maps the safetensors file at path and validates its header
// with ParseHeader. The file's data are not read into memory; pages are
// loaded on first touch.
func Open(path string) (*File, error) {
	fd, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("checkpoint: open safetensors file: %w; check the path", err)
	}
	defer fd.Close() // the mapping outlives the descriptor
	st, err := fd.Stat()
	if err != nil {
		return nil, fmt.Errorf("checkpoint: stat %s: %w", path, err)
	}
	if !st.Mode().IsRegular() {
		return nil, fmt.Errorf("%s: not a regular file; point at a .safetensors file", path)
	}
	size := st.Size()
	if size < 8 {
		// ParseHeader words the error; mmap of an empty file would fail.
		var prefix [8]byte
		n, _ := fd.ReadAt(prefix[:], 0)
		_, err := ParseHeader(path, prefix[:n], size)
		return nil, err
	}
	// Check the length prefix before mapping, so that a file claiming a huge
	// header is refused without any work.
	var lenBuf [8]byte
	if _, err := fd.ReadAt(lenBuf[:], 0); err != nil {
		return nil, fmt.Errorf("checkpoint: read %s: %w", path, err)
	}
	if n := binary.LittleEndian.Uint64(lenBuf[:]); n > MaxHeaderBytes || n > uint64(size-8) {
		_, err := ParseHeader(path, lenBuf[:], size)
		return nil, err
	}
	if size > math.MaxInt {
		return nil, fmt.Errorf("%s: %d bytes is too large to map on this platform", path, size)
	}
	data, err := unix.Mmap(int(fd.Fd()), 0, int(size), unix.PROT_READ, unix.MAP_SHARED)
	if err != nil {
		return nil, fmt.Errorf("checkpoint: mmap %s: %w", path, err)
	}
	f, err := newFile(path, data)
	if err != nil {
		_ = unix.Munmap(data)
		return nil, err
	}
	return f, nil
}

// newFile parses the header of the mapped data and builds the tensor views.
func newFile(path string, data []byte) (*File, error) {
	h, err := ParseHeader(path, data, int64(len(data)))
	if err != nil {
		return nil, err
	}
	f := &File{
		path:     path,
		data:     data,
		tensors:  make([]*Tensor, len(h.Tensors)),
		byName:   make(map[string]*Tensor, len(h.Tensors)),
		metadata: h.Metadata,
	}
	for i, ti := range h.Tensors {
		begin, end := h.DataStart+ti.Begin, h.DataStart+ti.End
		t := &Tensor{
			Name:   ti.Name,
			DType:  ti.DType,
			Shape:  ti.Shape,
			File:   path,
			Offset: begin,
			data:   data[begin:end:end],
		}
		f.tensors[i] = t
		f.byName[t.Name] = t
	}
	return f, nil
}

// Close unmaps the file. Tensor data obtained from f must not be used
// afterwards. Closing twice is harmless.
func (f *File) Close() error {
	if f.data == nil {
		return nil
	}
	data := f.data
	f.data = nil
	for _, t := range f.tensors {
		t.data = nil
	}
	if err := unix.Munmap(data); err != nil {
		return fmt.Errorf("checkpoint: unmap %s: %w", f.path, err)
	}
	return nil
}

// Path returns the path f was opened with.
func (f *File) Path() string { return f.path }

// Tensors returns the file's tensors in file (offset) order. The slice is
// the caller's; the tensors are shared.
func (f *File) Tensors() []*Tensor {
	return append([]*Tensor(nil), f.tensors...)
}

// Tensor returns the named tensor and whether it exists.
func (f *File) Tensor(name string) (*Tensor, bool) {
	t, ok := f.byName[name]
	return t, ok
}

// Metadata returns a copy of the header's "__metadata__" strings (nil when
// the header has none).
func (f *File) Metadata() map[string]string {
	if f.metadata == nil {
		return nil
	}
	md := make(map[string]string, len(f.metadata))
	for k, v := range f.metadata {
		md[k] = v
	}
	return md
}

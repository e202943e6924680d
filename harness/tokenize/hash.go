package tokenize

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"hash"
)

// SHA256 returns the hex SHA-256 of a canonical serialisation of
// everything that affects encoding and decoding: the vocabulary (by id),
// the merges (by rank), the added tokens, the pre-tokenizer options, the
// add rules and the BOS/EOS/PAD/UNK ids. It does not depend on file layout,
// key order or whitespace in the files, and is stable across runs.
func (t *Tokenizer) SHA256() string {
	h := sha256.New()
	w := hashWriter{h: h}
	w.str("sparsegate/tokenize canonical v1")
	w.int(len(t.raw))
	for id := range t.raw {
		w.str(t.vocab[id])
		w.bool(t.isAdded[id])
		w.bool(t.raw[id] != nil)
		w.bytes(t.raw[id])
	}
	w.int(len(t.merges))
	for _, m := range t.merges {
		w.int(int(m[0]))
		w.int(int(m[1]))
	}
	w.int(len(t.added))
	for _, a := range t.added {
		w.int(a.id)
		w.str(a.content)
		w.bool(a.special)
	}
	w.bool(t.addPrefixSpace)
	w.bool(t.useRegex)
	w.bool(t.ignoreMerges)
	w.ints(t.prefix)
	w.ints(t.suffix)
	w.int(t.bos)
	w.int(t.eos)
	w.int(t.pad)
	w.int(t.unk)
	return hex.EncodeToString(h.Sum(nil))
}

// hashWriter writes length-prefixed little-endian fields into a hash.
type hashWriter struct{ h hash.Hash }

func (w hashWriter) int(v int) {
	var b [8]byte
	binary.LittleEndian.PutUint64(b[:], uint64(int64(v)))
	w.h.Write(b[:])
}

func (w hashWriter) bool(v bool) {
	if v {
		w.h.Write([]byte{1})
	} else {
		w.h.Write([]byte{0})
	}
}

func (w hashWriter) bytes(b []byte) {
	w.int(len(b))
	w.h.Write(b)
}

func (w hashWriter) str(s string) { w.bytes([]byte(s)) }

func (w hashWriter) ints(v []int) {
	w.int(len(v))
	for _, x := range v {
		w.int(x)
	}
}

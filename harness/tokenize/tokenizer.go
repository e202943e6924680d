package tokenize

import (
	"fmt"
	"sort"
	"strings"
)

// addedToken is a token outside the BPE merges (special or not) whose bytes
// are its content.
type addedToken struct {
	id      int
	content string
	special bool
}

// Tokenizer is a loaded or trained byte-level BPE tokenizer. It is safe for
// concurrent use; see the package documentation for the rules it follows.
type Tokenizer struct {
	bt *byteTable

	vocab  []string       // id → byte-level vocabulary string ("" for ids only held by added tokens or unassigned)
	toID   map[string]int // byte-level vocabulary string → id
	raw    [][]byte       // id → raw bytes the token stands for (nil: unassigned id)
	byteID [256]int32     // byte → id of its one-byte symbol

	merges    [][2]int32 // merge list in rank order
	mergeRank map[uint64]mergeInfo

	added    []addedToken      // sorted by id
	isAdded  []bool            // id → is an added token (decodes to its content)
	matchers [256][]addedToken // added tokens by first content byte, longest first, for ParseSpecials
	hasAdded bool              // some added token has non-empty content

	addPrefixSpace bool
	useRegex       bool // false: each segment is one chunk (ByteLevel use_regex false)
	ignoreMerges   bool

	prefix, suffix []int // ids EncodeForModel adds

	bos, eos, pad, unk int // -1 when not configured

	cache chunkCache
}

// EncodeOptions selects how EncodeWith treats special tokens.
type EncodeOptions struct {
	// ParseSpecials recognises the content of every added token that
	// appears literally in the text and emits its id (leftmost, longest
	// first). When false, such text is tokenized as ordinary data.
	ParseSpecials bool
	// AddSpecials adds the tokens the configuration says the model sees
	// (for example a prepended BOS), as EncodeForModel does.
	AddSpecials bool
}

// Encode returns the content token ids of text, adding no special tokens and
// not parsing special tokens in the text. It accepts any bytes.
func (t *Tokenizer) Encode(text string) []int {
	return t.EncodeWith(text, EncodeOptions{})
}

// EncodeForModel returns Encode(text) with the special tokens the
// configuration says the model sees (BOS etc.) added around it.
func (t *Tokenizer) EncodeForModel(text string) []int {
	return t.EncodeWith(text, EncodeOptions{AddSpecials: true})
}

// EncodeWith encodes text under opts.
func (t *Tokenizer) EncodeWith(text string, opts EncodeOptions) []int {
	var out []int
	if opts.AddSpecials {
		out = append(out, t.prefix...)
	}
	if opts.ParseSpecials && t.hasAdded {
		start := 0
		for i := 0; i < len(text); {
			if a, ok := t.matchAdded(text[i:]); ok {
				out = t.encodeSegment(out, text[start:i])
				out = append(out, a.id)
				i += len(a.content)
				start = i
				continue
			}
			i++
		}
		out = t.encodeSegment(out, text[start:])
	} else {
		out = t.encodeSegment(out, text)
	}
	if opts.AddSpecials {
		out = append(out, t.suffix...)
	}
	return out
}

// matchAdded returns the longest added token whose content prefixes s.
func (t *Tokenizer) matchAdded(s string) (addedToken, bool) {
	for _, a := range t.matchers[s[0]] {
		if strings.HasPrefix(s, a.content) {
			return a, true
		}
	}
	return addedToken{}, false
}

// encodeSegment appends the ids of a text segment free of parsed specials.
func (t *Tokenizer) encodeSegment(out []int, seg string) []int {
	if seg == "" {
		return out
	}
	if t.addPrefixSpace && seg[0] != ' ' {
		seg = " " + seg
	}
	if !t.useRegex {
		return t.encodeChunk(out, seg)
	}
	splitGPT2(seg, func(a, b int) { out = t.encodeChunk(out, seg[a:b]) })
	return out
}

// encodeChunk appends the BPE ids of one pre-tokenizer chunk.
func (t *Tokenizer) encodeChunk(out []int, chunk string) []int {
	cacheable := len(chunk) <= cacheMaxChunkLen
	if cacheable {
		if ids, ok := t.cache.get(chunk); ok {
			for _, id := range ids {
				out = append(out, int(id))
			}
			return out
		}
	}
	var ids []int32
	if id, ok := t.wholeChunk(chunk); ok {
		ids = []int32{int32(id)}
	} else {
		syms := make([]int32, len(chunk))
		for i := 0; i < len(chunk); i++ {
			syms[i] = t.byteID[chunk[i]]
		}
		ids = applyMerges(syms, t.mergeRank)
	}
	if cacheable {
		t.cache.put(chunk, ids)
	}
	for _, id := range ids {
		out = append(out, int(id))
	}
	return out
}

// wholeChunk implements the BPE model's ignore_merges option: a chunk that
// is itself a vocabulary entry is emitted as that entry.
func (t *Tokenizer) wholeChunk(chunk string) (int, bool) {
	if !t.ignoreMerges {
		return 0, false
	}
	id, ok := t.toID[t.bt.encode([]byte(chunk))]
	return id, ok
}

// Decode returns the exact bytes the ids stand for, as a string; special
// and other added tokens decode to their content. An id outside
// 0..VocabSize()-1 or not assigned to any token is an error.
func (t *Tokenizer) Decode(ids []int) (string, error) {
	var sb strings.Builder
	for i, id := range ids {
		if id < 0 || id >= len(t.raw) || t.raw[id] == nil {
			return "", fmt.Errorf("tokenize: Decode: ids[%d] = %d is not a token id (valid ids are 0..%d); pass ids produced by this tokenizer", i, id, len(t.raw)-1)
		}
		sb.Write(t.raw[id])
	}
	return sb.String(), nil
}

// TokenBytes returns a copy of the raw bytes of one token (its content for
// added tokens), or nil for an id that is out of range or unassigned.
func (t *Tokenizer) TokenBytes(id int) []byte {
	if id < 0 || id >= len(t.raw) || t.raw[id] == nil {
		return nil
	}
	return append([]byte(nil), t.raw[id]...)
}

// VocabSize returns the number of token ids: the largest id of the
// vocabulary and the added tokens, plus one.
func (t *Tokenizer) VocabSize() int { return len(t.raw) }

// BOS returns the beginning-of-sequence token id, if one is configured.
func (t *Tokenizer) BOS() (int, bool) { return t.bos, t.bos >= 0 }

// EOS returns the end-of-sequence token id, if one is configured.
func (t *Tokenizer) EOS() (int, bool) { return t.eos, t.eos >= 0 }

// PAD returns the padding token id, if one is configured.
func (t *Tokenizer) PAD() (int, bool) { return t.pad, t.pad >= 0 }

// NumMerges returns the number of merge rules.
func (t *Tokenizer) NumMerges() int { return len(t.merges) }

// tokenLabel renders a token for messages: its content or vocabulary string.
func (t *Tokenizer) tokenLabel(id int) string {
	if id >= 0 && id < len(t.isAdded) && t.isAdded[id] {
		return string(t.raw[id])
	}
	if id >= 0 && id < len(t.vocab) && t.vocab[id] != "" {
		return t.vocab[id]
	}
	return fmt.Sprintf("#%d", id)
}

// Describe returns a one-line summary, e.g.
// "byte-level BPE, 50265 tokens, 50000 merges, BOS </s>=2 prepended".
func (t *Tokenizer) Describe() string {
	var sb strings.Builder
	fmt.Fprintf(&sb, "byte-level BPE, %d tokens, %d merges", len(t.raw), len(t.merges))
	if t.addPrefixSpace {
		sb.WriteString(", prefix space added")
	}
	describeIDs := func(ids []int, one int, name, verb string) {
		switch {
		case len(ids) == 0:
		case len(ids) == 1 && ids[0] == one:
			fmt.Fprintf(&sb, ", %s %s=%d %s", name, t.tokenLabel(one), one, verb)
		default:
			parts := make([]string, len(ids))
			for i, id := range ids {
				parts[i] = fmt.Sprintf("%s=%d", t.tokenLabel(id), id)
			}
			fmt.Fprintf(&sb, ", %s %s", strings.Join(parts, " "), verb)
		}
	}
	describeIDs(t.prefix, t.bos, "BOS", "prepended")
	describeIDs(t.suffix, t.eos, "EOS", "appended")
	if len(t.prefix) == 0 && len(t.suffix) == 0 {
		sb.WriteString(", no special tokens added")
	}
	return sb.String()
}

// finish builds the derived tables once vocab, raw, isAdded and added are
// set. It returns the first byte whose one-byte symbol is missing, or -1.
func (t *Tokenizer) finish() int {
	t.toID = make(map[string]int, len(t.vocab))
	for id, s := range t.vocab {
		if s != "" {
			t.toID[s] = id
		}
	}
	missing := -1
	for b := 0; b < 256; b++ {
		id, ok := t.toID[string(t.bt.toRune[b])]
		if !ok {
			if missing < 0 {
				missing = b
			}
			continue
		}
		t.byteID[b] = int32(id)
	}
	t.mergeRank = make(map[uint64]mergeInfo, len(t.merges))
	for r, m := range t.merges {
		res := t.toID[t.vocab[m[0]]+t.vocab[m[1]]]
		t.mergeRank[pairKey(m[0], m[1])] = mergeInfo{rank: int32(r), result: int32(res)}
	}
	sort.Slice(t.added, func(i, j int) bool { return t.added[i].id < t.added[j].id })
	t.matchers = [256][]addedToken{}
	t.hasAdded = false
	for _, a := range t.added {
		if a.content != "" {
			t.matchers[a.content[0]] = append(t.matchers[a.content[0]], a)
			t.hasAdded = true
		}
	}
	for i := range t.matchers {
		m := t.matchers[i]
		sort.SliceStable(m, func(x, y int) bool { return len(m[x].content) > len(m[y].content) })
	}
	return missing
}

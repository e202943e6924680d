package tokenize

import (
	"bytes"
	"container/heap"
	"errors"
	"fmt"
	"sort"
)

// TrainOptions configures Train.
type TrainOptions struct {
	// VocabSize is the number of ids wanted, counting the specials and the
	// 256 one-byte symbols. Training stops earlier when no pair is left.
	VocabSize int
	// Specials are special tokens, given ids 0..len(Specials)-1 in order
	// (e.g. "<|endoftext|>" as id 0); they are never learned from text.
	Specials []string
	// MinFrequency stops training when the most frequent pair occurs fewer
	// times; values below 1 mean 1.
	MinFrequency int
	// AddBOS and AddEOS make EncodeForModel prepend BOS / append EOS.
	AddBOS, AddEOS bool
	// BOS, EOS and PAD name members of Specials ("" for none).
	BOS, EOS, PAD string
}

// Train learns a byte-level BPE vocabulary from corpus by classic BPE: the
// text is cut into chunks by the GPT-2 pre-tokenizer, every chunk starts as
// its bytes (ids len(Specials)+b for byte b), and the most frequent adjacent
// pair, counted over all chunks weighted by frequency, is merged
// repeatedly. Ties are broken by the lexicographic byte order of the
// pair's left token, then of its right token, so the result is
// deterministic. Pair counts are updated incrementally: a merge only
// revisits the chunks that hold the pair.
func Train(corpus []string, opts TrainOptions) (*Tokenizer, error) {
	if err := opts.validate(); err != nil {
		return nil, err
	}
	k := len(opts.Specials)
	minFreq := int64(opts.MinFrequency)
	if minFreq < 1 {
		minFreq = 1
	}
	bt := newByteTable()
	st := newTrainState(corpus, k)
	strID := make(map[string]int, opts.VocabSize)
	for i, s := range opts.Specials {
		strID[s] = i
	}
	for b := 0; b < 256; b++ {
		strID[bt.encode([]byte{byte(b)})] = k + b
	}
	var merges []mergeSpec
	for len(st.tok) < opts.VocabSize {
		best, ok := st.popBest()
		if !ok || best.count < minFreq {
			break
		}
		nb := append(append([]byte(nil), st.tok[best.a]...), st.tok[best.b]...)
		s := bt.encode(nb)
		newID, exists := strID[s]
		if exists && newID < k {
			return nil, fmt.Errorf("tokenize: Train: TrainOptions.Specials[%d] %q equals the byte-level string of a learned token; choose a special the pre-tokenizer cannot produce as one chunk, e.g. \"<|name|>\"", newID, opts.Specials[newID])
		}
		if !exists {
			newID = len(st.tok)
			st.tok = append(st.tok, nb)
			strID[s] = newID
		}
		merges = append(merges, mergeSpec{a: bt.encode(st.tok[best.a]), b: bt.encode(st.tok[best.b]), place: fmt.Sprintf("learned merge %d", len(merges))})
		st.merge(best.a, best.b, int32(newID))
	}
	spec := &loadSpec{vocabFile: "Train", mergesFile: "Train", useRegex: true, merges: merges}
	spec.vocab = make([]string, len(st.tok))
	for id, b := range st.tok {
		if id < k {
			spec.vocab[id] = opts.Specials[id]
			spec.added = append(spec.added, addedToken{id: id, content: opts.Specials[id], special: true})
		} else {
			spec.vocab[id] = bt.encode(b)
		}
	}
	name := func(v, field string) tokenName { return tokenName{value: v, file: "TrainOptions", field: field} }
	cfg := &config{file: "TrainOptions", addBOS: opts.AddBOS, addEOS: opts.AddEOS,
		bos: name(opts.BOS, "BOS"), eos: name(opts.EOS, "EOS"), pad: name(opts.PAD, "PAD")}
	t, err := build(spec, cfg)
	if err != nil {
		return nil, fmt.Errorf("tokenize: Train: %w", err)
	}
	return t, nil
}

func (o *TrainOptions) validate() error {
	k := len(o.Specials)
	if o.VocabSize < k+256 {
		return fmt.Errorf("tokenize: Train: TrainOptions.VocabSize %d is below %d (%d specials + 256 byte symbols); raise it", o.VocabSize, k+256, k)
	}
	seen := map[string]bool{}
	for i, s := range o.Specials {
		if s == "" {
			return fmt.Errorf("tokenize: Train: TrainOptions.Specials[%d] is empty; give each special its text", i)
		}
		if seen[s] {
			return fmt.Errorf("tokenize: Train: TrainOptions.Specials[%d] %q is listed twice; keep one", i, s)
		}
		seen[s] = true
	}
	for _, f := range []struct{ field, v string }{{"BOS", o.BOS}, {"EOS", o.EOS}, {"PAD", o.PAD}} {
		if f.v != "" && !seen[f.v] {
			return fmt.Errorf("tokenize: Train: TrainOptions.%s %q is not in TrainOptions.Specials; add it there", f.field, f.v)
		}
	}
	if o.AddBOS && o.BOS == "" {
		return errors.New("tokenize: Train: TrainOptions.AddBOS is set but BOS is empty; name the BOS special")
	}
	if o.AddEOS && o.EOS == "" {
		return errors.New("tokenize: Train: TrainOptions.AddEOS is set but EOS is empty; name the EOS special")
	}
	return nil
}

// trainState holds the chunk table and the pair statistics.
type trainState struct {
	tok    [][]byte  // id → bytes (specials hold their content; they never pair)
	words  [][]int32 // unique chunks, sorted, as symbol ids
	counts []int64   // frequency of each chunk
	pairs  map[uint64]int64
	where  map[uint64][]int32 // pair → chunks that may hold it (may repeat)
	seen   []int32            // per chunk: last merge step that visited it
	step   int32
	delta  map[uint64]int64
	h      pairHeap
}

func newTrainState(corpus []string, k int) *trainState {
	freq := map[string]int64{}
	for _, doc := range corpus {
		splitGPT2(doc, func(a, b int) { freq[doc[a:b]]++ })
	}
	keys := make([]string, 0, len(freq))
	for w := range freq {
		keys = append(keys, w)
	}
	sort.Strings(keys)
	st := &trainState{pairs: map[uint64]int64{}, where: map[uint64][]int32{}, delta: map[uint64]int64{}}
	for i := 0; i < k; i++ {
		st.tok = append(st.tok, nil)
	}
	for b := 0; b < 256; b++ {
		st.tok = append(st.tok, []byte{byte(b)})
	}
	st.h.tok = &st.tok
	for wi, w := range keys {
		syms := make([]int32, len(w))
		for i := 0; i < len(w); i++ {
			syms[i] = int32(k) + int32(w[i])
		}
		st.words = append(st.words, syms)
		st.counts = append(st.counts, freq[w])
		for i := 0; i+1 < len(syms); i++ {
			p := pairKey(syms[i], syms[i+1])
			st.pairs[p] += freq[w]
			if l := st.where[p]; len(l) == 0 || l[len(l)-1] != int32(wi) {
				st.where[p] = append(l, int32(wi))
			}
		}
	}
	st.seen = make([]int32, len(st.words))
	for p, c := range st.pairs {
		st.h.items = append(st.h.items, pairEntry{count: c, a: int32(p >> 32), b: int32(uint32(p))})
	}
	heap.Init(&st.h)
	return st
}

// popBest returns the most frequent pair whose queued count is current.
func (st *trainState) popBest() (pairEntry, bool) {
	for st.h.Len() > 0 {
		e := heap.Pop(&st.h).(pairEntry)
		cur := st.pairs[pairKey(e.a, e.b)]
		if cur == e.count {
			return e, true
		}
		if cur > 0 {
			e.count = cur
			heap.Push(&st.h, e)
		}
	}
	return pairEntry{}, false
}

// merge replaces every occurrence of (a, b) by id, left to right without
// overlap, in the chunks that hold it, and updates the pair counts.
func (st *trainState) merge(a, b, id int32) {
	st.step++
	key := pairKey(a, b)
	clear(st.delta)
	for _, wi := range st.where[key] {
		if st.seen[wi] == st.step {
			continue
		}
		st.seen[wi] = st.step
		syms := st.words[wi]
		if !holdsPair(syms, a, b) {
			continue
		}
		c := st.counts[wi]
		for i := 0; i+1 < len(syms); i++ {
			st.delta[pairKey(syms[i], syms[i+1])] -= c
		}
		out := syms[:0]
		for i := 0; i < len(syms); i++ {
			if i+1 < len(syms) && syms[i] == a && syms[i+1] == b {
				out = append(out, id)
				i++
				continue
			}
			out = append(out, syms[i])
		}
		st.words[wi] = out
		for i := 0; i+1 < len(out); i++ {
			p := pairKey(out[i], out[i+1])
			st.delta[p] += c
			if out[i] == id || out[i+1] == id {
				st.where[p] = append(st.where[p], wi)
			}
		}
	}
	for p, d := range st.delta {
		if d == 0 {
			continue
		}
		n := st.pairs[p] + d
		if n <= 0 {
			delete(st.pairs, p)
		} else {
			st.pairs[p] = n
		}
		if d > 0 {
			heap.Push(&st.h, pairEntry{count: n, a: int32(p >> 32), b: int32(uint32(p))})
		}
	}
	delete(st.pairs, key)
	delete(st.where, key)
}

func holdsPair(syms []int32, a, b int32) bool {
	for i := 0; i+1 < len(syms); i++ {
		if syms[i] == a && syms[i+1] == b {
			return true
		}
	}
	return false
}

// pairEntry is a queued pair with the count it had when queued.
type pairEntry struct {
	count int64
	a, b  int32
}

// pairHeap orders pairs by count (highest first), then by the bytes of the
// left token, then of the right token (lowest first).
type pairHeap struct {
	items []pairEntry
	tok   *[][]byte
}

func (h *pairHeap) Len() int { return len(h.items) }
func (h *pairHeap) Less(i, j int) bool {
	x, y := h.items[i], h.items[j]
	if x.count != y.count {
		return x.count > y.count
	}
	t := *h.tok
	if c := bytes.Compare(t[x.a], t[y.a]); c != 0 {
		return c < 0
	}
	return bytes.Compare(t[x.b], t[y.b]) < 0
}
func (h *pairHeap) Swap(i, j int) { h.items[i], h.items[j] = h.items[j], h.items[i] }
func (h *pairHeap) Push(x any)    { h.items = append(h.items, x.(pairEntry)) }
func (h *pairHeap) Pop() any {
	x := h.items[len(h.items)-1]
	h.items = h.items[:len(h.items)-1]
	return x
}

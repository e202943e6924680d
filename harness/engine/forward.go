package engine

import (
	"fmt"
	"math"
	"sync"
	"sync/atomic"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
)

// A Session is one sequence being run: the tokens seen so far, as the keys and
// values every layer cached for them. A Session is not safe for concurrent use.
type Session struct {
	m    *Model
	n    int         // positions cached
	k, v [][]float32 // per layer: n × (KVHeads·HeadDim)
	// present, per layer, is nil while every key/value head was computed at
	// every position; otherwise n × KVHeads flags (false: skipped by a hook).
	present [][]bool
}

// NewSession starts an empty sequence. It reuses the cache memory of a
// session of this model that was closed, when there is one.
func (m *Model) NewSession() *Session {
	L := m.Config.Layers
	if m.kvFree != nil {
		if c, ok := m.kvFree.Get().(*kvMemory); ok {
			for i := range c.k {
				c.k[i], c.v[i] = c.k[i][:0], c.v[i][:0]
			}
			return &Session{m: m, k: c.k, v: c.v, present: make([][]bool, L)}
		}
	}
	return &Session{m: m, k: make([][]float32, L), v: make([][]float32, L), present: make([][]bool, L)}
}

// kvMemory is the per-layer key and value storage of a closed session.
type kvMemory struct{ k, v [][]float32 }

// Close hands the session's cache memory back to its model, for a later
// NewSession to fill instead of fresh memory (whose every page costs a
// fault on first touch: tens of microseconds each on some virtual
// machines, most of a decode step's cache growth). The session must not be
// used after Close, nor may any Clone share its memory (clones copy, so
// they do not); closing twice does nothing.
func (s *Session) Close() {
	if s.k == nil || s.m.kvFree == nil {
		return
	}
	s.m.kvFree.Put(&kvMemory{k: s.k, v: s.v})
	s.k, s.v, s.present, s.n = nil, nil, nil, 0
}

// appendKV caches one position's keys and values at layer li. present marks
// which key/value heads were computed (nil: all).
func (s *Session) appendKV(li int, k, v []float32, present []bool) {
	kvh := s.m.Config.KVHeads
	pos := len(s.k[li]) / len(k)
	if present != nil && s.present[li] == nil {
		all := make([]bool, pos*kvh, (pos+64)*kvh)
		for i := range all {
			all[i] = true
		}
		s.present[li] = all
	}
	if s.present[li] != nil {
		if present == nil {
			for range kvh {
				s.present[li] = append(s.present[li], true)
			}
		} else {
			s.present[li] = append(s.present[li], present...)
		}
	}
	s.k[li] = appendDoubling(s.k[li], k)
	s.v[li] = appendDoubling(s.v[li], v)
}

// reserveKV makes room in layer li's cache for rows more positions, so a
// batch appends without regrowing (one allocation of the needed size, or
// double the old capacity when that is larger).
func (s *Session) reserveKV(li, rows int) {
	kvd := s.m.Config.KVHeads * s.m.Config.HeadDim
	s.k[li] = withRoom(s.k[li], len(s.k[li])+rows*kvd, 0)
	s.v[li] = withRoom(s.v[li], len(s.v[li])+rows*kvd, 0)
}

// withRoom returns c with capacity for need values: c itself when it has
// it, else a copy with capacity max(2·cap(c), need, atLeast).
func withRoom(c []float32, need, atLeast int) []float32 {
	if need <= cap(c) {
		return c
	}
	grown := make([]float32, len(c), max(2*cap(c), need, atLeast))
	copy(grown, c)
	return grown
}

// appendDoubling appends row to c, doubling the capacity when it runs out
// (append alone grows large slices by about a quarter, which re-copies a
// long cache every few positions).
func appendDoubling(c, row []float32) []float32 {
	return append(withRoom(c, len(c)+len(row), 64*len(row)), row...)
}

// Len returns the number of positions cached.
func (s *Session) Len() int { return s.n }

// Reset empties the cache, keeping its memory.
func (s *Session) Reset() {
	s.n = 0
	for i := range s.k {
		s.k[i], s.v[i], s.present[i] = s.k[i][:0], s.v[i][:0], nil
	}
}

// Truncate drops cached positions from n on.
func (s *Session) Truncate(n int) {
	if n < 0 || n > s.n {
		panic("engine: Truncate out of range")
	}
	kv := s.m.Config.KVHeads * s.m.Config.HeadDim
	s.n = n
	for i := range s.k {
		s.k[i], s.v[i] = s.k[i][:n*kv], s.v[i][:n*kv]
		if s.present[i] != nil {
			s.present[i] = s.present[i][:n*s.m.Config.KVHeads]
		}
	}
}

// row locates one input row of a batch.
type row struct {
	seq int // index into the batch
	pos int // absolute position in its sequence
}

// Forward appends tokens to several sessions at once (batched prefill or
// batched decode) and returns the final hidden states after the last norm,
// one row of Hidden values per token, sequences back to back in batch order.
// hook may be nil. Sessions must be distinct.
func (m *Model) Forward(sessions []*Session, tokens [][]int, hook Hook) ([]float32, error) {
	out, _, err := m.forward(sessions, tokens, hook, nil, -1)
	return out, err
}

// forward runs layers [from.Layer, L) (all, with the embeddings, when from is
// nil), or stops before layer stop (>= 0) and returns the residual stream
// entering it and the previous layer.
func (m *Model) forward(sessions []*Session, tokens [][]int, hook Hook, from *Prefix, stop int) ([]float32, *Prefix, error) {
	if len(sessions) != len(tokens) {
		panic("engine: Forward needs one token slice per session")
	}
	cfg := m.Config
	var rows []row
	for b, s := range sessions {
		if s.m != m {
			panic("engine: session of another model")
		}
		if s.n+len(tokens[b]) > cfg.MaxPositions {
			return nil, nil, fmt.Errorf("sequence %d: %d tokens exceed the model's %d positions; use a shorter window", b, s.n+len(tokens[b]), cfg.MaxPositions)
		}
		for t, id := range tokens[b] {
			if id < 0 || id >= cfg.VocabSize {
				return nil, nil, fmt.Errorf("sequence %d, position %d: token id %d is outside the vocabulary of %d", b, s.n+t, id, cfg.VocabSize)
			}
			rows = append(rows, row{seq: b, pos: s.n + t})
		}
	}
	R, d := len(rows), cfg.Hidden
	if R == 0 {
		return nil, nil, nil
	}
	st := m.newState(R)
	defer m.putState(st)
	st.rows, st.sessions, st.hook = rows, sessions, hook
	first := 0
	if from != nil {
		if len(from.At) != R*d || (from.Layer > 0 && len(from.Prev) != R*d) {
			panic("engine: prefix of another shape")
		}
		first = from.Layer
		copy(st.x, from.At)
		if hook != nil && from.Layer > 0 {
			st.layerIn = append(st.layerIn[:0], from.Prev...)
		}
	} else {
		// Embeddings.
		r := 0
		for b := range tokens {
			for _, id := range tokens[b] {
				x := st.x[r*d : (r+1)*d]
				m.embed.Row(x, id)
				if m.pos != nil {
					m.pos.Row(st.tmp[:d], rows[r].pos+cfg.PositionOffset)
					kernels.Add(x, x, st.tmp[:d])
				}
				r++
			}
		}
	}
	var prev []float32 // residual entering the previous layer (for stop)
	for li := first; li < len(m.layers); li++ {
		if li == stop {
			return nil, &Prefix{Layer: li, At: append([]float32(nil), st.x...), Prev: prev}, nil
		}
		if stop > 0 && li == stop-1 {
			prev = append([]float32(nil), st.x...)
		}
		if hook != nil {
			st.prevIn, st.layerIn = st.layerIn, st.prevIn
			st.layerIn = append(st.layerIn[:0], st.x...)
		}
		m.attention(st, li)
		m.mlp(st, li)
	}
	out := make([]float32, R*d)
	for r := 0; r < R; r++ {
		m.norm(out[r*d:(r+1)*d], st.x[r*d:(r+1)*d], m.normW, m.normB)
	}
	last := len(m.layers) - 1
	for _, s := range sessions {
		s.n = len(s.k[last]) / (cfg.KVHeads * cfg.HeadDim)
	}
	return out, nil, nil
}

// A Prefix is the residual stream of a fresh sequence entering layer Layer
// (At) and, when Layer > 0, entering layer Layer−1 (Prev, which lookahead
// predictors read), computed densely: what every run whose layers before
// Layer are dense shares, so bisect and sweep need not recompute it.
type Prefix struct {
	Layer    int
	At, Prev []float32
}

// DensePrefix runs a fresh sequence densely through layers [0, layer) and
// returns the residual stream entering layer (0 < layer < Layers).
func (m *Model) DensePrefix(tokens []int, layer int) (*Prefix, error) {
	if layer <= 0 || layer >= len(m.layers) {
		panic("engine: prefix layer out of range")
	}
	_, p, err := m.forward([]*Session{m.NewSession()}, [][]int{tokens}, nil, nil, layer)
	return p, err
}

// ForwardFrom runs a fresh sequence from a Prefix of the same tokens:
// layers [p.Layer, Layers) with the hook, returning the final hidden rows as
// Forward does. The bits equal Forward's when the hook keeps the layers
// before p.Layer dense. The session it uses cannot be continued, so it is
// not exposed.
func (m *Model) ForwardFrom(tokens []int, p *Prefix, hook Hook) ([]float32, error) {
	out, _, err := m.forward([]*Session{m.NewSession()}, [][]int{tokens}, hook, p, -1)
	return out, err
}

// LogProbsFrom is LogProbs for a fresh sequence started from a Prefix, which
// must be DensePrefix(tokens[:len(tokens)-1], layer): the rows that predict.
func (m *Model) LogProbsFrom(tokens []int, p *Prefix, hook Hook) ([]float64, error) {
	if len(tokens) < 2 {
		return []float64{}, nil
	}
	hidden, err := m.ForwardFrom(tokens[:len(tokens)-1], p, hook)
	if err != nil {
		return nil, err
	}
	out := make([]float64, len(tokens)-1)
	if err := m.targetLogProbs(hidden, tokens[1:], out, nil); err != nil {
		return nil, err
	}
	return out, nil
}

// state is the scratch of one Forward call.
type state struct {
	rows     []row
	sessions []*Session
	hook     Hook
	x        []float32 // residual stream, R×d
	h        []float32 // normed input, R×d
	q        []float32 // queries, R×(H·hd)
	k, v     []float32 // new keys and values, R×(KV·hd)
	a        []float32 // attention output, R×(H·hd)
	u, g     []float32 // MLP hidden, R×FFN
	tmp      []float32
	layerIn  []float32 // residual entering the current layer (hook only)
	prevIn   []float32 // residual entering the previous layer (hook only)
	one      *rowScratch
}

// rowScratch holds the buffers a hooked single-row step uses at every
// layer (attentionHooked, mlpRow), kept with a single-row state so that a
// decode step allocates none of them afresh: on a large heap fresh memory
// means first-touch page faults, which measured a fifth of a sparse decode
// step (PERF_NOTES.md, session 8).
type rowScratch struct {
	q, k, v, fk, fv         []float32
	scores                  [][]float32 // one per worker of attendHeads
	present                 []bool
	idxQ, idxKV, idxO, nidx []int32
}

// newState returns a Forward's scratch for R rows: for one row, a state
// a previous single-row call handed back (cleared, so it equals a fresh
// one), else a fresh one.
func (m *Model) newState(R int) *state {
	if R == 1 && m.states != nil {
		if st, ok := m.states.Get().(*state); ok {
			for _, b := range [][]float32{st.x, st.h, st.q, st.k, st.v, st.a, st.u, st.g, st.tmp} {
				clear(b)
			}
			st.layerIn, st.prevIn = st.layerIn[:0], st.prevIn[:0]
			return st
		}
	}
	c := m.Config
	hd := c.Heads * c.HeadDim
	kv := c.KVHeads * c.HeadDim
	width := max(c.Hidden, 3*c.Hidden, hd, c.FFN)
	st := &state{
		x: make([]float32, R*c.Hidden), h: make([]float32, R*c.Hidden),
		q: make([]float32, R*hd), k: make([]float32, R*kv), v: make([]float32, R*kv),
		a: make([]float32, R*hd), u: make([]float32, R*c.FFN),
		tmp: make([]float32, width),
	}
	if c.Family == checkpoint.Llama {
		st.g = make([]float32, R*c.FFN)
	}
	if R == 1 {
		st.one = m.newRowScratch()
	}
	return st
}

// newRowScratch returns the buffers of a hooked single-row step.
func (m *Model) newRowScratch() *rowScratch {
	c := m.Config
	qd, kvd := c.Heads*c.HeadDim, c.KVHeads*c.HeadDim
	return &rowScratch{
		q: make([]float32, qd), k: make([]float32, kvd), v: make([]float32, kvd),
		fk: make([]float32, kvd), fv: make([]float32, kvd), present: make([]bool, c.KVHeads),
	}
}

// putState hands a single-row state back for the next single-row call
// (nothing of it outlives Forward: hooks see its buffers only during their
// calls, and Forward returns fresh slices).
func (m *Model) putState(st *state) {
	if len(st.rows) != 1 || st.one == nil || m.states == nil {
		return
	}
	st.rows, st.sessions, st.hook = nil, nil, nil
	m.states.Put(st)
}

// norm applies the family's normalisation to one vector.
func (m *Model) norm(dst, x, w, b []float32) {
	eps := float32(m.Config.NormEps)
	if m.Config.Family == checkpoint.Llama {
		kernels.RMSNorm(dst, x, w, eps)
		return
	}
	kernels.LayerNorm(dst, x, w, b, eps)
}

func (m *Model) attention(st *state, li int) {
	c, L := m.Config, &m.layers[li]
	R, d, hd := len(st.rows), c.Hidden, c.HeadDim
	qd, kvd := c.Heads*hd, c.KVHeads*hd
	for r := 0; r < R; r++ {
		m.norm(st.h[r*d:(r+1)*d], st.x[r*d:(r+1)*d], L.attnNormW, L.attnNormB)
	}
	if st.hook != nil && R == 1 {
		m.attentionHooked(st, li)
		return
	}
	// Batched projections for every head (with a hook, dropped heads are
	// zeroed afterwards: batched products cost far less per multiply than
	// row-at-a-time ones, and give the same bits).
	if L.qkv != nil {
		fused := make([]float32, R*3*d)
		m.scratch.Linear(fused, st.h, R, L.qkv, L.qkvB, m.threads)
		for r := 0; r < R; r++ {
			f := fused[r*3*d:]
			copy(st.q[r*qd:(r+1)*qd], f[:d])
			copy(st.k[r*kvd:(r+1)*kvd], f[d:2*d])
			copy(st.v[r*kvd:(r+1)*kvd], f[2*d:3*d])
		}
	} else {
		m.scratch.Linear(st.q, st.h, R, L.q, L.qB, m.threads)
		m.scratch.Linear(st.k, st.h, R, L.k, L.kB, m.threads)
		m.scratch.Linear(st.v, st.h, R, L.v, L.vB, m.threads)
	}
	// Keys get their positions and join the caches before any query reads them.
	if st.hook == nil && R > 1 {
		for r := 0; r < R; {
			e := r + 1
			for e < R && st.rows[e].seq == st.rows[r].seq {
				e++
			}
			st.sessions[st.rows[r].seq].reserveKV(li, e-r)
			r = e
		}
	}
	for r := 0; r < R; r++ {
		if m.rope != nil {
			kernels.Rope(st.k[r*kvd:(r+1)*kvd], hd, st.rows[r].pos, m.rope)
			kernels.Rope(st.q[r*qd:(r+1)*qd], hd, st.rows[r].pos, m.rope)
		}
		if st.hook == nil {
			st.sessions[st.rows[r].seq].appendKV(li, st.k[r*kvd:(r+1)*kvd], st.v[r*kvd:(r+1)*kvd], nil)
		}
	}
	if st.hook != nil {
		m.attentionHookedBatch(st, li)
		return
	}
	m.attendRows(st, li)
	out := st.h // the normed input is no longer needed
	m.scratch.Linear(out, st.a, R, L.o, L.oB, m.threads)
	kernels.Add(st.x, st.x, out)
}

// attentionHookedBatch finishes hooked attention for a batch whose queries,
// keys and values were projected for every head: row by row, in order, the
// hook picks the heads (its oracle sees the cache as the row-by-row path
// would), the row's keys and values join the cache with the unused key/value
// heads absent, then the kept heads attend (in parallel over rows) and the
// dropped heads' outputs stay zero through the batched output projection.
// The bits equal attentionHooked's.
func (m *Model) attentionHookedBatch(st *state, li int) {
	c, L := m.Config, &m.layers[li]
	R, hd := len(st.rows), c.HeadDim
	qd, kvd := c.Heads*hd, c.KVHeads*hd
	group := c.Heads / c.KVHeads
	kept := make([][]int32, R)
	for r := 0; r < R; r++ {
		s := st.sessions[st.rows[r].seq]
		q, k, v := st.q[r*qd:(r+1)*qd], st.k[r*kvd:(r+1)*kvd], st.v[r*kvd:(r+1)*kvd]
		tok := m.token(st, li, r)
		tok.dense = func() []float32 { return m.headNorms(st, li, r, q, k, v) }
		heads := st.hook.Heads(tok)
		if heads == nil {
			s.appendKV(li, k, v, nil)
			continue
		}
		kept[r] = append(make([]int32, 0, len(heads)), heads...)
		present := make([]bool, c.KVHeads)
		for _, hh := range heads {
			present[hh/int32(group)] = true
		}
		fk, fv := make([]float32, kvd), make([]float32, kvd)
		for g, ok := range present {
			if ok {
				copy(fk[g*hd:(g+1)*hd], k[g*hd:(g+1)*hd])
				copy(fv[g*hd:(g+1)*hd], v[g*hd:(g+1)*hd])
			}
		}
		s.appendKV(li, fk, fv, present)
	}
	// Dropped heads contribute zero; the kept ones run as in a dense
	// prefill (blocked where rows form a run), which gives the bits of
	// attending head by head.
	for r := 0; r < R; r++ {
		if kept[r] != nil {
			clear(st.a[r*qd : (r+1)*qd])
		}
	}
	m.attendRowsKept(st, li, kept)
	out := st.h
	m.scratch.Linear(out, st.a, R, L.o, L.oB, m.threads)
	kernels.Add(st.x, st.x, out)
}

// attentionHooked runs attention row by row, asking the hook which heads run.
// Only the kept heads' queries, keys, values, attention and output columns are
// computed; a key/value head none of whose query heads run is not computed
// and is marked absent in the cache, so later tokens attend past it.
func (m *Model) attentionHooked(st *state, li int) {
	c, L := m.Config, &m.layers[li]
	R, d, hd := len(st.rows), c.Hidden, c.HeadDim
	qd := c.Heads * hd
	group := c.Heads / c.KVHeads
	y := st.tmp[:d]
	one := st.one
	if one == nil { // not a single-row state (R is 1 on every caller today)
		one = m.newRowScratch()
	}
	q, k, v, present := one.q, one.k, one.v, one.present
	for r := 0; r < R; r++ {
		s := st.sessions[st.rows[r].seq]
		pos := st.rows[r].pos
		h := st.h[r*d : (r+1)*d]
		tok := m.token(st, li, r)
		tok.dense = func() []float32 { return m.denseHeadNorms(st, li, r) }
		heads := st.hook.Heads(tok)
		// Which key/value heads this token needs.
		var groups []int32
		if heads != nil {
			for _, hh := range heads {
				if g := hh / int32(group); len(groups) == 0 || groups[len(groups)-1] != g {
					groups = append(groups, g)
				}
			}
		}
		m.projectQKV(L, h, q, k, v, heads, groups, one)
		nq, nkv := c.Heads, c.KVHeads
		if heads != nil {
			nq, nkv = len(heads), len(groups)
		}
		if m.rope != nil {
			kernels.Rope(q[:nq*hd], hd, pos, m.rope)
			kernels.Rope(k[:nkv*hd], hd, pos, m.rope)
		}
		if heads == nil {
			s.appendKV(li, k, v, nil)
		} else {
			// Unpack the computed groups into a full cache row; absent ones stay zero.
			fk, fv := one.fk, one.fv
			clear(fk)
			clear(fv)
			clear(present)
			for i, g := range groups {
				copy(fk[int(g)*hd:(int(g)+1)*hd], k[i*hd:(i+1)*hd])
				copy(fv[int(g)*hd:(int(g)+1)*hd], v[i*hd:(i+1)*hd])
				present[g] = true
			}
			s.appendKV(li, fk, fv, present)
		}
		a := st.a[r*qd : (r+1)*qd]
		m.attendHeads(a, q, s, li, pos+1, heads, nq, one)
		if heads == nil {
			m.scratch.Linear(y, a, 1, L.o, L.oB, m.threads)
		} else {
			one.idxO = headColumns(one.idxO, heads, hd)
			switch {
			case L.o.Panels != nil:
				// A kept head's hd inputs are one contiguous stretch of
				// every panel of o: streamed at the dense GEMV's speed.
				m.scratch.LinearScatterInPanels(y, a[:nq*hd], L.o, L.oB, one.idxO, m.threads)
			case L.oT != nil:
				m.scratch.LinearScatterInParallel(y, a[:nq*hd], L.oT, L.oB, one.idxO, m.threads)
			default:
				m.scratch.LinearScatterInParallel(y, a[:nq*hd], L.o, L.oB, one.idxO, m.threads)
			}
		}
		xr := st.x[r*d : (r+1)*d]
		kernels.Add(xr, xr, y)
	}
}

// projectQKV computes one token's queries for the kept heads and keys and
// values for the kept key/value heads (all when heads is nil), each packed
// head after head.
func (m *Model) projectQKV(L *layer, h, q, k, v []float32, heads, groups []int32, one *rowScratch) {
	c := m.Config
	d, hd := c.Hidden, c.HeadDim
	if L.qkv != nil { // fused GPT-2 layout: logical rows q [0,d), k [d,2d), v [2d,3d)
		if heads == nil {
			all := make([]float32, 3*d)
			m.scratch.Linear(all, h, 1, L.qkv, L.qkvB, m.threads)
			copy(q, all[:d])
			copy(k, all[d:2*d])
			copy(v, all[2*d:])
			return
		}
		idx := headColumns(nil, heads, hd)
		kc := headColumns(nil, groups, hd)
		for _, j := range kc {
			idx = append(idx, int32(d)+j)
		}
		for _, j := range kc {
			idx = append(idx, int32(2*d)+j)
		}
		out := make([]float32, len(idx))
		m.scratch.LinearGatherParallel(out, h, L.qkv, L.qkvB, idx, m.threads)
		nq, nk := len(heads)*hd, len(kc)
		copy(q, out[:nq])
		copy(k, out[nq:nq+nk])
		copy(v, out[nq+nk:])
		return
	}
	if heads == nil {
		m.scratch.Linear(q, h, 1, L.q, L.qB, m.threads)
		m.scratch.Linear(k, h, 1, L.k, L.kB, m.threads)
		m.scratch.Linear(v, h, 1, L.v, L.vB, m.threads)
		return
	}
	one.idxKV = headColumns(one.idxKV, groups, hd)
	one.idxQ = headColumns(one.idxQ, heads, hd)
	kc := one.idxKV
	m.scratch.LinearGatherParts(h, []kernels.GatherPart{
		{Y: q[:len(heads)*hd], W: L.q, Bias: L.qB, Idx: one.idxQ},
		{Y: k[:len(kc)], W: L.k, Bias: L.kB, Idx: kc},
		{Y: v[:len(kc)], W: L.v, Bias: L.vB, Idx: kc},
	}, m.threads)
}

// attendHeads runs one row's attention for nq query heads: heads[i] (i when
// heads is nil), reading q and writing a at place i. The heads are shared
// over the model's threads (each is independent of the others, so the bits
// do not depend on threads); one holds each worker's score buffer, kept for
// the next call. A single-token step would otherwise attend on one thread
// while the team's helper waits, its reads of the cached keys and values
// latency-bound.
func (m *Model) attendHeads(a, q []float32, s *Session, li, n int, heads []int32, nq int, one *rowScratch) {
	hd := m.Config.HeadDim
	workers := max(1, min(m.threads, nq))
	for len(one.scores) < workers {
		one.scores = append(one.scores, nil)
	}
	var id atomic.Int32
	m.scratch.RunJobs(nq, workers, func() func(int) {
		buf := &one.scores[id.Add(1)-1]
		return func(i int) {
			hh := i
			if heads != nil {
				hh = int(heads[i])
			}
			*buf = m.attendHead(a[i*hd:(i+1)*hd], q[i*hd:(i+1)*hd], s, li, hh, n, *buf)
		}
	})
}

// attendHead computes one query head's causal softmax attention over the
// first n cached positions of its key/value head, skipping positions where
// that key/value head was not computed, into out. scores is reusable scratch.
func (m *Model) attendHead(out, q []float32, s *Session, li, head, n int, scores []float32) []float32 {
	c := m.Config
	hd, kvd := c.HeadDim, c.KVHeads*c.HeadDim
	g := head / (c.Heads / c.KVHeads)
	scale := float32(1 / math.Sqrt(float64(hd)))
	if cap(scores) < n {
		scores = make([]float32, n)
	}
	scores = scores[:n]
	kernels.DotStrided(scores, q, s.k[li], kvd, g*hd)
	m.attendScores(out, scores, s, li, g, scale)
	return scores
}

// attendScores finishes one query head's attention from its raw scores
// (q·k for each of the first len(scores) cached positions of key/value head
// g): positions where g was not computed get −Inf, the rest are scaled, the
// softmax is taken in place, and out receives the weighted sum of values.
func (m *Model) attendScores(out, scores []float32, s *Session, li, g int, scale float32) {
	c := m.Config
	kvd := c.KVHeads * c.HeadDim
	if P := s.present[li]; P == nil {
		kernels.Scale(scale, scores)
	} else {
		for j := range scores {
			if !P[j*c.KVHeads+g] {
				scores[j] = float32(math.Inf(-1))
				continue
			}
			scores[j] *= scale
		}
	}
	kernels.Softmax(scores)
	clear(out)
	kernels.AxpyRows(out, scores, s.v[li], kvd, g*c.HeadDim) // rows with weight 0 skipped
}

// Blocked attention: a run of at least attendMinRun consecutive rows of one
// sequence at consecutive positions (a prefill) computes each head's raw
// scores attendBlock queries at a time, as one product of the block's
// queries with the head's cached keys. Each score is the same dot product
// (one ascending chain) as attendHead's, so the bits are the same; a block
// computes the scores of keys past a query's own position too, and ignores
// them.
const (
	attendBlock  = 64
	attendMinRun = 8
)

// attnScratch is one worker's buffers for blocked attention.
type attnScratch struct {
	q, k, s []float32
}

// grow returns b with length n, reallocated when its capacity is short.
func grow[T any](b []T, n int) []T {
	if cap(b) < n {
		return make([]T, n)
	}
	return b[:n]
}

// int32s returns n int32s of scratch: *buf grown when short (and kept
// there), or a fresh slice when buf is nil.
func int32s(buf *[]int32, n int) []int32 {
	if buf == nil {
		return make([]int32, n)
	}
	*buf = grow(*buf, n)
	return *buf
}

// attendRows computes every row's attention output (all heads) into st.a,
// in parallel over jobs: one job per row outside runs, one per block and
// head inside them.
func (m *Model) attendRows(st *state, li int) { m.attendRowsKept(st, li, nil) }

// attendRowsKept is attendRows for only the heads each row keeps: kept[r]
// lists row r's heads ascending, nil meaning all (kept itself nil: all heads
// of every row). Outputs of heads a row drops are not written. A block job
// runs for a head only when some row of the block keeps it.
func (m *Model) attendRowsKept(st *state, li int, kept [][]int32) {
	c := m.Config
	R, hd := len(st.rows), c.HeadDim
	qd := c.Heads * hd
	var keeps func(r, h int) bool // nil: every row keeps every head
	if kept != nil {
		mask := make([]bool, R*c.Heads)
		for r, ks := range kept {
			if ks == nil {
				for h := range c.Heads {
					mask[r*c.Heads+h] = true
				}
				continue
			}
			for _, h := range ks {
				mask[r*c.Heads+int(h)] = true
			}
		}
		keeps = func(r, h int) bool { return mask[r*c.Heads+h] }
	}
	if R == 1 && keeps == nil { // a decode step: its heads shared out
		one := st.one
		if one == nil {
			one = m.newRowScratch()
		}
		m.attendHeads(st.a, st.q, st.sessions[st.rows[0].seq], li, st.rows[0].pos+1, nil, c.Heads, one)
		return
	}
	type job struct{ r0, r1, h int } // h < 0: row r0 alone, every head
	var jobs []job
	for r := 0; r < R; {
		e := r + 1
		for e < R && st.rows[e].seq == st.rows[r].seq && st.rows[e].pos == st.rows[e-1].pos+1 {
			e++
		}
		if e-r < attendMinRun {
			for i := r; i < e; i++ {
				jobs = append(jobs, job{i, i + 1, -1})
			}
		} else {
			for b := r; b < e; b += attendBlock {
				be := min(b+attendBlock, e)
				for h := 0; h < c.Heads; h++ {
					if keeps != nil && !anyKeeps(keeps, b, be, h) {
						continue
					}
					jobs = append(jobs, job{b, be, h})
				}
			}
		}
		r = e
	}
	scale := float32(1 / math.Sqrt(float64(hd)))
	parallelJobs(len(jobs), m.threads, func(next func() (int, bool)) {
		as, _ := m.attn.Get().(*attnScratch)
		if as == nil {
			as = new(attnScratch)
		}
		defer m.attn.Put(as)
		var scores []float32
		for j, ok := next(); ok; j, ok = next() {
			jb := jobs[j]
			s := st.sessions[st.rows[jb.r0].seq]
			if jb.h < 0 {
				r := jb.r0
				for h := 0; h < c.Heads; h++ {
					if keeps != nil && !keeps(r, h) {
						continue
					}
					scores = m.attendHead(st.a[r*qd+h*hd:r*qd+(h+1)*hd], st.q[r*qd+h*hd:r*qd+(h+1)*hd],
						s, li, h, st.rows[r].pos+1, scores)
				}
				continue
			}
			m.attendBlockHead(st, li, jb.r0, jb.r1, jb.h, s, as, scale, keeps)
		}
	})
}

// anyKeeps reports whether some row of [r0, r1) keeps head h.
func anyKeeps(keeps func(r, h int) bool, r0, r1, h int) bool {
	for r := r0; r < r1; r++ {
		if keeps(r, h) {
			return true
		}
	}
	return false
}

// attendBlockHead computes head h's attention for rows [r0, r1), one run
// of session s at consecutive positions: the block's queries times the first
// n cached keys (n the last row's position + 1) as one product, then each
// row's own prefix of scores through attendScores (only the rows that keep
// h, when keeps is not nil).
func (m *Model) attendBlockHead(st *state, li, r0, r1, h int, s *Session, as *attnScratch, scale float32, keeps func(r, h int) bool) {
	c := m.Config
	hd, qd, kvd := c.HeadDim, c.Heads*c.HeadDim, c.KVHeads*c.HeadDim
	g := h / (c.Heads / c.KVHeads)
	rows, n := r1-r0, st.rows[r1-1].pos+1
	as.q, as.k, as.s = grow(as.q, rows*hd), grow(as.k, n*hd), grow(as.s, rows*n)
	K := s.k[li]
	for j := 0; j < n; j++ {
		copy(as.k[j*hd:(j+1)*hd], K[j*kvd+g*hd:j*kvd+(g+1)*hd])
	}
	for i := 0; i < rows; i++ {
		r := r0 + i
		copy(as.q[i*hd:(i+1)*hd], st.q[r*qd+h*hd:r*qd+(h+1)*hd])
	}
	keys := &kernels.Mat{DType: kernels.F32, Out: n, In: hd, F32: as.k}
	m.scratch.Linear(as.s, as.q, rows, keys, nil, 1)
	for i := 0; i < rows; i++ {
		r := r0 + i
		if keeps != nil && !keeps(r, h) {
			continue
		}
		np := st.rows[r].pos + 1
		m.attendScores(st.a[r*qd+h*hd:r*qd+(h+1)*hd], as.s[i*n:i*n+np], s, li, g, scale)
	}
}

// headColumns expands head indices to the indices of their hd-wide slices,
// into dst[:0] (grown when short).
func headColumns(dst, heads []int32, hd int) []int32 {
	idx := dst[:0]
	for _, h := range heads {
		for j := 0; j < hd; j++ {
			idx = append(idx, h*int32(hd)+int32(j))
		}
	}
	return idx
}

// denseHeadNorms runs the full attention for row r on the side (nothing is
// cached) and returns the L2 norm of each head's output: the oracle's
// magnitude for heads. Earlier positions come from the cache; the row's own
// key and value are computed here.
func (m *Model) denseHeadNorms(st *state, li, r int) []float32 {
	c, L := m.Config, &m.layers[li]
	d, hd, qd, kvd := c.Hidden, c.HeadDim, c.Heads*c.HeadDim, c.KVHeads*c.HeadDim
	q, k, v := make([]float32, qd), make([]float32, kvd), make([]float32, kvd)
	m.projectQKV(L, st.h[r*d:(r+1)*d], q, k, v, nil, nil, nil)
	pos := st.rows[r].pos
	if m.rope != nil {
		kernels.Rope(q, hd, pos, m.rope)
		kernels.Rope(k, hd, pos, m.rope)
	}
	return m.headNorms(st, li, r, q, k, v)
}

// headNorms is denseHeadNorms with the row's queries, keys and values (all
// heads, positions applied) already computed.
func (m *Model) headNorms(st *state, li, r int, q, k, v []float32) []float32 {
	c := m.Config
	hd := c.HeadDim
	pos := st.rows[r].pos
	s := st.sessions[st.rows[r].seq]
	side := &Session{m: m, n: s.n, k: s.k, v: s.v, present: s.present}
	side.k = append([][]float32(nil), s.k...)
	side.v = append([][]float32(nil), s.v...)
	side.present = append([][]bool(nil), s.present...)
	// Appending through copied slice headers writes at most past the end of the
	// session's arrays, where it never reads; the session itself is unchanged.
	side.appendKV(li, k, v, nil)
	norms := make([]float32, c.Heads)
	out := make([]float32, hd)
	var scores []float32
	for h := 0; h < c.Heads; h++ {
		scores = m.attendHead(out, q[h*hd:(h+1)*hd], side, li, h, pos+1, scores)
		norms[h] = float32(math.Sqrt(float64(kernels.Dot(out, out))))
	}
	return norms
}

// gatherMLPShare returns the largest mean kept fraction of a batch of R rows
// at which the MLP runs as per-row gathers (kept rows of the up projection,
// kept columns of the down projection, with the row-dot GEMV); above
// it the batch runs as batched dense products with the dropped neurons
// zeroed. Both give the same bits, so this is a speed choice only: the
// cheaper of the two per block. Break-even points measured with
// BenchmarkPrefillSparse-style runs on the OPT-125M-shaped f16 checkpoint
// (2 threads, AVX2; harness/kernels/PERF_NOTES.md): at 8 rows gathers won
// even at 50% kept (a short batch cannot amortise the dense product's
// weight packing); at 64 and 512 rows gathers and the dense product broke
// even near 30% kept.
func gatherMLPShare(R int) float64 {
	if R < 16 {
		return 0.5
	}
	return 0.25
}

func (m *Model) mlp(st *state, li int) {
	c, L := m.Config, &m.layers[li]
	R, d, f := len(st.rows), c.Hidden, c.FFN
	for r := 0; r < R; r++ {
		m.norm(st.h[r*d:(r+1)*d], st.x[r*d:(r+1)*d], L.mlpNormW, L.mlpNormB)
	}
	var idx [][]int32
	kept := 0
	if st.hook != nil {
		idx = make([][]int32, R)
		toks := make([]*Token, R)
		for r := 0; r < R; r++ {
			tok := m.token(st, li, r)
			h := tok.Input
			tok.dense = func() []float32 {
				act := make([]float32, f)
				m.mlpHidden(act, h, L, nil, nil)
				return act
			}
			toks[r] = tok
		}
		bh, batched := st.hook.(BatchHook)
		var sels [][]int32
		if batched && R > 1 {
			sels = bh.NeuronsBatch(toks)
		}
		for r, tok := range toks {
			var sel []int32
			if sels != nil {
				sel = sels[r]
			} else {
				sel = st.hook.Neurons(tok)
			}
			if sel != nil {
				idx[r] = append(make([]int32, 0, len(sel)), sel...) // the hook may reuse its slice; empty keeps none
				kept += len(sel)
			} else {
				kept += f
			}
		}
	}
	if st.hook == nil || (R > 1 && float64(kept) > gatherMLPShare(R)*float64(R*f)) {
		m.scratch.Linear(st.u, st.h, R, L.up, L.upB, m.threads)
		if L.gate != nil {
			m.scratch.Linear(st.g, st.h, R, L.gate, nil, m.threads)
			kernels.SiLUMul(st.g, st.u)
			st.u, st.g = st.g, st.u
		} else {
			m.activate(st.u)
		}
		for r := range idx { // zero what the hook dropped
			if idx[r] != nil {
				zeroExcept(st.u[r*f:(r+1)*f], idx[r])
			}
		}
		out := st.h
		m.scratch.Linear(out, st.u, R, L.down, L.downB, m.threads)
		kernels.Add(st.x, st.x, out)
		return
	}
	if R == 1 || m.threads == 1 {
		for r := 0; r < R; r++ {
			var nbuf *[]int32
			if st.one != nil {
				nbuf = &st.one.nidx
			}
			m.mlpRow(st, L, idx, r, st.tmp[:d], nbuf)
		}
		return
	}
	// Several rows: whole rows per worker, each on one thread, instead of
	// every row's gathers split over the threads (the same bits; no
	// hand-off per row).
	one := m.WithThreads(1)
	parallelJobs(R, m.threads, func(next func() (int, bool)) {
		y := make([]float32, d)
		var nbuf []int32
		for r, ok := next(); ok; r, ok = next() {
			one.mlpRow(st, L, idx, r, y, &nbuf)
		}
	})
}

// mlpRow runs row r's MLP on the neurons idx[r] (all when nil) and adds it
// to the row's residual; y is d-sized scratch, nbuf (nil: allocate) the
// caller's buffer for neuron-major indices.
func (m *Model) mlpRow(st *state, L *layer, idx [][]int32, r int, y []float32, nbuf *[]int32) {
	d, f := m.Config.Hidden, m.Config.FFN
	h := st.h[r*d : (r+1)*d]
	u := st.u[r*f : (r+1)*f]
	if idx[r] == nil {
		m.mlpHidden(u, h, L, nil, nil)
		m.scratch.Linear(y, u, 1, L.down, L.downB, m.threads)
	} else {
		hk := u[:len(idx[r])]
		m.mlpHidden(hk, h, L, idx[r], nbuf)
		// A kept neuron whose activation is exactly zero (ReLU) adds
		// nothing: with finite weights dropping it keeps the bits
		// (kernels.DropZeroInputs) and saves its down column's read.
		if n := L.neurons; n != nil {
			cols := n.index(nbuf, idx[r], n.down)
			if L.downFinite {
				hk, cols = kernels.DropZeroInputs(hk, cols, cols)
			}
			m.scratch.LinearScatterInParallel(y, hk, n.cols, L.downB, cols, m.threads)
		} else {
			kept := idx[r]
			if L.downFinite {
				hk, kept = kernels.DropZeroInputs(hk, kept, int32s(nbuf, len(kept)))
			}
			m.scratch.LinearScatterInParallel(y, hk, L.down, L.downB, kept, m.threads)
		}
	}
	xr := st.x[r*d : (r+1)*d]
	kernels.Add(xr, xr, y)
}

// zeroExcept zeroes u outside the ascending indices keep.
func zeroExcept(u []float32, keep []int32) {
	next := 0
	for i := range u {
		if next < len(keep) && int(keep[next]) == i {
			next++
			continue
		}
		u[i] = 0
	}
}

// mlpHidden computes one token's post-activation MLP values for the neurons
// idx (all when nil) into dst; nbuf is as for mlpRow.
func (m *Model) mlpHidden(dst, h []float32, L *layer, idx []int32, nbuf *[]int32) {
	n := L.neurons
	switch {
	case idx == nil:
		m.scratch.Linear(dst, h, 1, L.up, L.upB, m.threads)
	case n != nil:
		// The neuron-major rows, then the bias: LinearGather adds it last,
		// so adding it here gives the same bits.
		m.scratch.LinearGatherParallel(dst, h, n.rows, nil, n.index(nbuf, idx, n.up), m.threads)
		if L.upB != nil {
			for r, j := range idx {
				dst[r] += L.upB[j]
			}
		}
	default:
		m.scratch.LinearGatherParallel(dst, h, L.up, L.upB, idx, m.threads)
	}
	if L.gate == nil {
		m.activate(dst)
		return
	}
	g := make([]float32, len(dst))
	switch {
	case idx == nil:
		m.scratch.Linear(g, h, 1, L.gate, nil, m.threads)
	case n != nil:
		m.scratch.LinearGatherParallel(g, h, n.rows, nil, n.index(nbuf, idx, n.gate), m.threads)
	default:
		m.scratch.LinearGatherParallel(g, h, L.gate, nil, idx, m.threads)
	}
	kernels.SiLUMul(g, dst)
	copy(dst, g)
}

func (m *Model) activate(x []float32) {
	switch m.Config.Activation {
	case "relu":
		kernels.ReLU(x)
	case "gelu":
		kernels.GELU(x)
	case "gelu_new":
		kernels.GELUTanh(x)
	case "silu":
		kernels.SiLU(x)
	default:
		panic("engine: activation " + m.Config.Activation + " passed validation but has no kernel")
	}
}

// token builds the hook's view of row r at layer li.
func (m *Model) token(st *state, li, r int) *Token {
	d := m.Config.Hidden
	t := &Token{
		Layer:      li,
		Seq:        st.rows[r].seq,
		Pos:        st.rows[r].pos,
		LayerInput: st.layerIn[r*d : (r+1)*d],
		Input:      st.h[r*d : (r+1)*d],
	}
	if li > 0 {
		t.PrevLayerInput = st.prevIn[r*d : (r+1)*d]
	}
	return t
}

// parallelJobs runs n jobs on up to threads goroutines (the caller is one
// of them): each worker calls fn once with next, which hands out the next
// job index until none are left. Which worker runs a job never changes its
// result.
func parallelJobs(n, threads int, fn func(next func() (int, bool))) {
	var counter atomic.Int64
	next := func() (int, bool) {
		j := int(counter.Add(1) - 1)
		return j, j < n
	}
	threads = min(threads, n)
	var wg sync.WaitGroup
	for range threads - 1 {
		wg.Go(func() { fn(next) })
	}
	fn(next)
	wg.Wait()
}

// Logits computes the output head for n hidden rows into dst (n×VocabSize).
func (m *Model) Logits(dst, hidden []float32, n int) {
	m.scratch.Linear(dst, hidden, n, m.head, nil, m.threads)
}

package engine

import (
	"fmt"
	"math"
	"sync"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
)

// A Session is one sequence being run: the tokens seen so far, as the keys and
// values every layer cached for them. A Session is not safe for concurrent use.
type Session struct {
	m    *Model
	n    int         // positions cached
	k, v [][]float32 // per layer: n × (KVHeads·HeadDim)
}

// NewSession starts an empty sequence.
func (m *Model) NewSession() *Session {
	return &Session{m: m, k: make([][]float32, m.Config.Layers), v: make([][]float32, m.Config.Layers)}
}

// Len returns the number of positions cached.
func (s *Session) Len() int { return s.n }

// Reset empties the cache, keeping its memory.
func (s *Session) Reset() {
	s.n = 0
	for i := range s.k {
		s.k[i], s.v[i] = s.k[i][:0], s.v[i][:0]
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
			return nil, fmt.Errorf("sequence %d: %d tokens exceed the model's %d positions; use a shorter window", b, s.n+len(tokens[b]), cfg.MaxPositions)
		}
		for t, id := range tokens[b] {
			if id < 0 || id >= cfg.VocabSize {
				return nil, fmt.Errorf("sequence %d, position %d: token id %d is outside the vocabulary of %d", b, s.n+t, id, cfg.VocabSize)
			}
			rows = append(rows, row{seq: b, pos: s.n + t})
		}
	}
	R, d := len(rows), cfg.Hidden
	if R == 0 {
		return nil, nil
	}
	st := m.newState(R)
	st.rows, st.sessions, st.hook = rows, sessions, hook
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
	for li := range m.layers {
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
	for _, s := range sessions {
		s.n = len(s.k[0]) / (cfg.KVHeads * cfg.HeadDim)
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
}

func (m *Model) newState(R int) *state {
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
	return st
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
	// Keys and values for every head; queries for all heads on the dense path.
	heads := make([][]int32, R) // nil: all heads
	if L.qkv != nil {
		fused := make([]float32, R*3*d)
		kernels.Linear(fused, st.h, R, L.qkv, L.qkvB, m.threads)
		for r := 0; r < R; r++ {
			f := fused[r*3*d:]
			copy(st.q[r*qd:(r+1)*qd], f[:d])
			copy(st.k[r*kvd:(r+1)*kvd], f[d:2*d])
			copy(st.v[r*kvd:(r+1)*kvd], f[2*d:3*d])
		}
	} else {
		if st.hook == nil {
			kernels.Linear(st.q, st.h, R, L.q, L.qB, m.threads)
		}
		kernels.Linear(st.k, st.h, R, L.k, L.kB, m.threads)
		kernels.Linear(st.v, st.h, R, L.v, L.vB, m.threads)
	}
	// Keys get their positions and join the caches before any query reads them.
	for r := 0; r < R; r++ {
		if m.rope != nil {
			kernels.Rope(st.k[r*kvd:(r+1)*kvd], hd, st.rows[r].pos, m.rope)
		}
		s := st.sessions[st.rows[r].seq]
		s.k[li] = append(s.k[li], st.k[r*kvd:(r+1)*kvd]...)
		s.v[li] = append(s.v[li], st.v[r*kvd:(r+1)*kvd]...)
	}
	if st.hook != nil {
		for r := 0; r < R; r++ {
			tok := m.token(st, li, r)
			tok.dense = func() []float32 { return m.denseHeadNorms(st, li, r) }
			heads[r] = st.hook.Heads(tok)
			if L.qkv == nil {
				m.queries(st, li, r, heads[r])
			} else if heads[r] != nil {
				packHeads(st.q[r*qd:(r+1)*qd], heads[r], hd)
			}
		}
	}
	if m.rope != nil {
		for r := 0; r < R; r++ {
			n := c.Heads
			if heads[r] != nil {
				n = len(heads[r])
			}
			kernels.Rope(st.q[r*qd:r*qd+n*hd], hd, st.rows[r].pos, m.rope)
		}
	}
	m.attend(st, li, heads)
	// Output projection and residual.
	if st.hook == nil {
		out := st.h // the normed input is no longer needed
		kernels.Linear(out, st.a, R, L.o, L.oB, m.threads)
		kernels.Add(st.x, st.x, out)
		return
	}
	y := st.tmp[:d]
	for r := 0; r < R; r++ {
		a := st.a[r*qd : (r+1)*qd]
		if heads[r] == nil {
			kernels.Linear(y, a, 1, L.o, L.oB, m.threads)
		} else {
			kernels.LinearScatterIn(y, a[:len(heads[r])*hd], L.o, L.oB, headColumns(heads[r], hd))
		}
		xr := st.x[r*d : (r+1)*d]
		kernels.Add(xr, xr, y)
	}
}

// queries computes one row's queries for the kept heads (all when nil), packed
// head after head.
func (m *Model) queries(st *state, li, r int, heads []int32) {
	c, L := m.Config, &m.layers[li]
	d, qd := c.Hidden, c.Heads*c.HeadDim
	h, q := st.h[r*d:(r+1)*d], st.q[r*qd:(r+1)*qd]
	if heads == nil {
		kernels.Linear(q, h, 1, L.q, L.qB, m.threads)
		return
	}
	kernels.LinearGather(q[:len(heads)*c.HeadDim], h, L.q, L.qB, headColumns(heads, c.HeadDim))
}

// packHeads moves the kept heads of a full query row to its front.
func packHeads(q []float32, heads []int32, hd int) {
	for i, h := range heads {
		copy(q[i*hd:(i+1)*hd], q[int(h)*hd:(int(h)+1)*hd])
	}
}

// headColumns expands head indices to the indices of their hd-wide slices.
func headColumns(heads []int32, hd int) []int32 {
	idx := make([]int32, 0, len(heads)*hd)
	for _, h := range heads {
		for j := 0; j < hd; j++ {
			idx = append(idx, h*int32(hd)+int32(j))
		}
	}
	return idx
}

// attend computes causal softmax attention for every row and kept head, in
// parallel over rows (each row's result is independent of the split).
func (m *Model) attend(st *state, li int, heads [][]int32) {
	c := m.Config
	R, hd := len(st.rows), c.HeadDim
	qd, kvd := c.Heads*hd, c.KVHeads*hd
	group := c.Heads / c.KVHeads
	scale := float32(1 / math.Sqrt(float64(hd)))
	parallelRows(R, m.threads, func(r0, r1 int) {
		var scores []float32
		for r := r0; r < r1; r++ {
			s := st.sessions[st.rows[r].seq]
			n := st.rows[r].pos + 1
			if cap(scores) < n {
				scores = make([]float32, n)
			}
			scores = scores[:n]
			K, V := s.k[li], s.v[li]
			count := c.Heads
			if heads[r] != nil {
				count = len(heads[r])
			}
			for i := 0; i < count; i++ {
				h := i
				if heads[r] != nil {
					h = int(heads[r][i])
				}
				g := h / group
				q := st.q[r*qd+i*hd : r*qd+(i+1)*hd]
				for j := 0; j < n; j++ {
					scores[j] = kernels.Dot(q, K[j*kvd+g*hd:j*kvd+(g+1)*hd]) * scale
				}
				kernels.Softmax(scores)
				out := st.a[r*qd+i*hd : r*qd+(i+1)*hd]
				clear(out)
				for j := 0; j < n; j++ {
					kernels.Axpy(scores[j], V[j*kvd+g*hd:j*kvd+(g+1)*hd], out)
				}
			}
		}
	})
}

// denseHeadNorms runs the full attention for one row on a copy and returns the
// L2 norm of each head's output (the oracle's magnitude for heads).
func (m *Model) denseHeadNorms(st *state, li, r int) []float32 {
	c, L := m.Config, &m.layers[li]
	d, hd, qd, kvd := c.Hidden, c.HeadDim, c.Heads*c.HeadDim, c.KVHeads*c.HeadDim
	h := st.h[r*d : (r+1)*d]
	q := make([]float32, qd)
	if L.qkv != nil {
		all := make([]float32, 3*d)
		kernels.Linear(all, h, 1, L.qkv, L.qkvB, 1)
		copy(q, all[:d])
	} else {
		kernels.Linear(q, h, 1, L.q, L.qB, 1)
	}
	if m.rope != nil {
		kernels.Rope(q, hd, st.rows[r].pos, m.rope)
	}
	// Every key and value up to this row's position is already cached.
	s := st.sessions[st.rows[r].seq]
	n := st.rows[r].pos + 1
	K, V := s.k[li], s.v[li]
	norms := make([]float32, c.Heads)
	scores := make([]float32, n)
	out := make([]float32, hd)
	scale := float32(1 / math.Sqrt(float64(hd)))
	group := c.Heads / c.KVHeads
	for hh := 0; hh < c.Heads; hh++ {
		g := hh / group
		for j := 0; j < n; j++ {
			scores[j] = kernels.Dot(q[hh*hd:(hh+1)*hd], K[j*kvd+g*hd:j*kvd+(g+1)*hd]) * scale
		}
		kernels.Softmax(scores)
		clear(out)
		for j := 0; j < n; j++ {
			kernels.Axpy(scores[j], V[j*kvd+g*hd:j*kvd+(g+1)*hd], out)
		}
		norms[hh] = float32(math.Sqrt(float64(kernels.Dot(out, out))))
	}
	return norms
}

func (m *Model) mlp(st *state, li int) {
	c, L := m.Config, &m.layers[li]
	R, d, f := len(st.rows), c.Hidden, c.FFN
	for r := 0; r < R; r++ {
		m.norm(st.h[r*d:(r+1)*d], st.x[r*d:(r+1)*d], L.mlpNormW, L.mlpNormB)
	}
	if st.hook == nil {
		kernels.Linear(st.u, st.h, R, L.up, L.upB, m.threads)
		if L.gate != nil {
			kernels.Linear(st.g, st.h, R, L.gate, nil, m.threads)
			kernels.SiLUMul(st.g, st.u)
			st.u, st.g = st.g, st.u
		} else {
			m.activate(st.u)
		}
		out := st.h
		kernels.Linear(out, st.u, R, L.down, L.downB, m.threads)
		kernels.Add(st.x, st.x, out)
		return
	}
	y := st.tmp[:d]
	for r := 0; r < R; r++ {
		tok := m.token(st, li, r)
		h := st.h[r*d : (r+1)*d]
		tok.Input = h
		u := st.u[r*f : (r+1)*f]
		tok.dense = func() []float32 {
			act := make([]float32, f)
			m.mlpHidden(act, h, L, nil)
			return act
		}
		idx := st.hook.Neurons(tok)
		if idx == nil {
			m.mlpHidden(u, h, L, nil)
			kernels.Linear(y, u, 1, L.down, L.downB, m.threads)
		} else {
			m.mlpHidden(u[:len(idx)], h, L, idx)
			kernels.LinearScatterIn(y, u[:len(idx)], L.down, L.downB, idx)
		}
		xr := st.x[r*d : (r+1)*d]
		kernels.Add(xr, xr, y)
	}
}

// mlpHidden computes one token's post-activation MLP values for the neurons
// idx (all when nil) into dst.
func (m *Model) mlpHidden(dst, h []float32, L *layer, idx []int32) {
	if idx == nil {
		kernels.Linear(dst, h, 1, L.up, L.upB, m.threads)
	} else {
		kernels.LinearGather(dst, h, L.up, L.upB, idx)
	}
	if L.gate == nil {
		m.activate(dst)
		return
	}
	g := make([]float32, len(dst))
	if idx == nil {
		kernels.Linear(g, h, 1, L.gate, nil, m.threads)
	} else {
		kernels.LinearGather(g, h, L.gate, nil, idx)
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

// parallelRows splits [0,n) into contiguous chunks over up to threads goroutines.
func parallelRows(n, threads int, fn func(r0, r1 int)) {
	if threads > n {
		threads = n
	}
	if threads <= 1 {
		fn(0, n)
		return
	}
	var wg sync.WaitGroup
	chunk := (n + threads - 1) / threads
	for r0 := 0; r0 < n; r0 += chunk {
		r1 := min(r0+chunk, n)
		wg.Add(1)
		go func() {
			defer wg.Done()
			fn(r0, r1)
		}()
	}
	wg.Wait()
}

// Logits computes the output head for n hidden rows into dst (n×VocabSize).
func (m *Model) Logits(dst, hidden []float32, n int) {
	kernels.Linear(dst, hidden, n, m.head, nil, m.threads)
}

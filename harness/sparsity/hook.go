package sparsity

import (
	"cmp"
	"math"
	"sync"

	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
)

// HookOptions choose how a build's hook runs.
type HookOptions struct {
	// Dense forces the listed units to run dense, whatever their rule (what
	// bisect toggles). Units outside the model are ignored.
	Dense map[Unit]bool
	// Stats, when set, accumulates what every non-dense unit of the build
	// kept (units forced dense count as keeping all).
	Stats *Stats
	// Recall also measures, per token, the recall of the kept set against
	// the oracle set of the same size; it costs a Token.Dense call per unit.
	Recall bool
	// Threads, when > 0, bounds the kernel workers of predictor scoring
	// (0: the base model's thread count). Results do not depend on it.
	Threads int
}

// Hook returns an engine.Hook that applies the build's rules token by token.
// The hook keeps scratch buffers, so it is for one goroutine (one engine call
// at a time); make one hook per goroutine. Its selections allocate nothing
// per token (what the engine allocates, such as Token.Dense, is the engine's).
func (b *Build) Hook(opts HookOptions) engine.Hook {
	cfg := b.Base.Config
	h := &hook{
		threads: cmp.Or(opts.Threads, b.Base.Threads()),
		sel:     make([][2]selector, cfg.Layers),
		stats:   opts.Stats,
		recall:  opts.Recall,
		none:    make([]int32, 0),
	}
	width := max(cfg.FFN, cfg.Heads)
	h.out[0], h.out[1] = make([]int32, 0, width), make([]int32, 0, width)
	h.oracle = make([]int32, 0, width)
	h.order = make([]uint64, 2*width)
	h.mag = make([]float32, width)
	for l := range h.sel {
		for _, c := range Components() {
			u := Unit{Layer: l, Component: c}
			s := &h.sel[l][c.index()]
			s.unit, s.rule, s.width = u, b.Rule(u), b.Width(u)
			s.dense = s.rule.Mode == Dense || opts.Dense[u]
			if s.dense {
				continue
			}
			switch s.rule.Mode {
			case Static:
				s.keep = make([]int32, len(s.rule.Keep))
				for i, v := range s.rule.Keep {
					s.keep[i] = int32(v)
				}
			case PredictorMode:
				s.pred = b.scorer(u)
				if len(h.hidden) < s.pred.p.Rank {
					h.hidden = make([]float32, s.pred.p.Rank)
					h.live = make([]int32, s.pred.p.Rank)
				}
			}
		}
	}
	return h
}

// hook is the engine.Hook of a build.
type hook struct {
	threads int           // kernel workers for predictor scoring
	sel     [][2]selector // by layer, mlp then attention
	stats   *Stats
	recall  bool

	// The engine may keep a returned list until the call for the next token
	// returns, so selections alternate between two buffers.
	out         [2][]int32
	flip        int
	none        []int32
	oracle      []int32
	order       []uint64
	mag, hidden []float32
	live        []int32 // the predictor hidden units ReLU left non-zero (scorer.scores)
}

// selector is one unit's rule, ready to run.
type selector struct {
	unit  Unit
	rule  Rule
	width int
	dense bool    // rule dense or forced dense
	keep  []int32 // static
	pred  *scorer // predictor
	st    *UnitStats
}

// scorer evaluates a predictor with its matrices bound once. It gives
// Predictor.Scores bit for bit: its binary16 matrices hold the same values
// and every Linear path gives the same bits (the kernels' contract),
// whatever the thread count.
type scorer struct {
	p     *Predictor
	w1    kernels.Mat      // Rank×In, with its panel copy
	w2    kernels.Mat      // Out×Rank stored input-major (Transposed)
	units []int32          // 0 … Rank-1
	sc    *kernels.Scratch // the base model's, whose team the second product shares
}

// scorer returns unit u's predictor bound to its scoring matrices and to
// the base model's Scratch.
func (b *Build) scorer(u Unit) *scorer {
	p, m := b.preds[u], b.scoring[u]
	units := make([]int32, p.Rank)
	for i := range units {
		units[i] = int32(i)
	}
	return &scorer{p: p, w1: m[0], w2: m[1], units: units, sc: b.Base.Scratch()}
}

// scores writes one token's scores into dst (hidden and live are
// rank-sized scratch). The small first product runs in the calling
// goroutine; the second, which holds most of the predictor's weights,
// splits its outputs over up to threads goroutines. Its inputs are ReLU
// outputs, about half of them zero: it runs over the non-zero ones only
// (kernels.DropZeroInputs; the same bits, since Predictor.Check, run by
// newBuild, has refused non-finite weights), reading each one's run of
// weights as one stream.
func (s *scorer) scores(dst, hidden []float32, live []int32, x []float32, threads int) {
	s.sc.Linear(hidden, x, 1, &s.w1, s.p.B1, 1)
	kernels.ReLU(hidden)
	hk, kept := kernels.DropZeroInputs(hidden, s.units, live)
	s.sc.LinearScatterInParallel(dst, hk, &s.w2, s.p.B2, kept, threads)
}

// Heads implements engine.Hook.
func (h *hook) Heads(t *engine.Token) []int32 {
	return h.choose(&h.sel[t.Layer][1], t.Input, t.PrevLayerInput, t.Dense)
}

// Neurons implements engine.Hook.
func (h *hook) Neurons(t *engine.Token) []int32 {
	return h.choose(&h.sel[t.Layer][0], t.Input, t.PrevLayerInput, t.Dense)
}

// choose applies s's rule to one token, given its component input, the
// previous layer's input and its dense magnitudes (Token.Dense): nil for all
// units, otherwise an ascending list (h.none when empty) that stays valid
// through the next call.
func (h *hook) choose(s *selector, input, prev []float32, dense func() []float32) []int32 {
	var kept []int32
	h.flip ^= 1
	out := h.out[h.flip]
	switch {
	case s.dense:
		h.record(s, dense, nil)
		return nil
	case s.rule.Mode == Static:
		kept = s.keep
	case s.rule.Mode == Oracle:
		kept = topKInto(out, h.order, absInto(h.mag[:s.width], dense()), s.rule.K)
	case s.rule.Mode == Threshold:
		thr := s.rule.Threshold
		if s.rule.On == OnInput {
			thr *= rms(input)
		}
		kept = out[:0]
		for i, v := range dense() {
			if math.Abs(float64(v)) > thr {
				kept = append(kept, int32(i))
			}
		}
	case s.rule.Mode == PredictorMode:
		x := input
		if s.rule.Input == InputPrevious {
			x = prev
		}
		scores := h.mag[:s.width]
		s.pred.scores(scores, h.hidden[:s.pred.p.Rank], h.live, x, h.threads)
		kept = topKInto(out, h.order, scores, s.rule.K)
	default:
		panic("sparsity: hook reached a rule that Open should have refused")
	}
	h.record(s, dense, kept)
	if len(kept) == 0 {
		return h.none
	}
	return kept[:len(kept):len(kept)]
}

// record adds one token's outcome to the statistics; kept nil means all.
func (h *hook) record(s *selector, dense func() []float32, kept []int32) {
	if h.stats == nil {
		return
	}
	if s.st == nil {
		s.st = h.stats.get(s.unit, s.width)
	}
	n := s.width
	if kept != nil {
		n = len(kept)
	}
	s.st.Tokens++
	s.st.Kept += int64(n)
	if !h.recall || n == 0 {
		return
	}
	hits, of := n, n
	if kept != nil {
		// The oracle is the top n by magnitude, less its exact zeros: a unit
		// that contributes nothing is not one the kept set should have had
		// (with ReLU most are zero, and ties among zeros are arbitrary).
		mag := absInto(h.mag[:s.width], dense())
		oracle := topKInto(h.oracle, h.order, mag, n)
		nz := oracle[:0]
		for _, i := range oracle {
			if mag[i] > 0 {
				nz = append(nz, i)
			}
		}
		hits, of = intersectCount(kept, nz), len(nz)
	}
	s.st.RecallHits += int64(hits)
	s.st.RecallOf += int64(of)
}

// absInto writes |src| into dst and returns dst.
func absInto(dst, src []float32) []float32 {
	for i, v := range src {
		dst[i] = float32(math.Abs(float64(v)))
	}
	return dst
}

// rms is the root mean square of x, summed in ascending order in float64.
func rms(x []float32) float64 {
	var s float64
	for _, v := range x {
		s += float64(v) * float64(v)
	}
	return math.Sqrt(s / float64(len(x)))
}

// topKInto returns, ascending, the indices of the k largest values (ties go
// to the lower index, NaN ranks below everything), appended to dst[:0];
// scratch holds at least 2·len(vals) keys. It selects the same set as TopK
// without allocating.
func topKInto(dst []int32, scratch []uint64, vals []float32, k int) []int32 {
	if k < 0 || k > len(vals) {
		panic("sparsity: topKInto k out of range")
	}
	return topKKeys(dst, scratch, vals, k)
}

// intersectCount counts the common elements of two ascending lists.
func intersectCount(a, b []int32) int {
	n, i, j := 0, 0, 0
	for i < len(a) && j < len(b) {
		switch {
		case a[i] < b[j]:
			i++
		case a[i] > b[j]:
			j++
		default:
			n, i, j = n+1, i+1, j+1
		}
	}
	return n
}

// NeuronsBatch implements engine.BatchHook: a predictor rule scores every
// row with two batched products (the same bits as row by row, by the
// kernels' contract) and then picks each row's top k; other rules go token
// by token. Results and statistics equal those of Neurons in row order.
func (h *hook) NeuronsBatch(toks []*engine.Token) [][]int32 {
	out := make([][]int32, len(toks))
	if len(toks) == 0 {
		return out
	}
	s := &h.sel[toks[0].Layer][0]
	if s.dense || s.rule.Mode != PredictorMode {
		for i, t := range toks {
			if sel := h.Neurons(t); sel != nil {
				out[i] = append(make([]int32, 0, len(sel)), sel...)
			}
		}
		return out
	}
	p := s.pred.p
	R := len(toks)
	x := make([]float32, R*p.In)
	for i, t := range toks {
		in := t.Input
		if s.rule.Input == InputPrevious {
			in = t.PrevLayerInput
		}
		copy(x[i*p.In:(i+1)*p.In], in)
	}
	hidden := make([]float32, R*p.Rank)
	kernels.Linear(hidden, x, R, &s.pred.w1, p.B1, h.threads)
	kernels.ReLU(hidden)
	scores := make([]float32, R*p.Out)
	kernels.Linear(scores, hidden, R, &s.pred.w2, p.B2, h.threads)
	// Each row's top k is independent: split the rows over the workers
	// (each with its own scratch), then record in row order.
	workers := max(1, min(h.threads, R/8))
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func(r0, r1 int) {
			defer wg.Done()
			order := make([]uint64, 2*p.Out)
			for i := r0; i < r1; i++ {
				out[i] = topKInto(make([]int32, 0, s.rule.K), order, scores[i*p.Out:(i+1)*p.Out], s.rule.K)
			}
		}(w*R/workers, (w+1)*R/workers)
	}
	wg.Wait()
	for i, t := range toks {
		h.record(s, t.Dense, out[i])
		if len(out[i]) == 0 {
			out[i] = h.none
		}
	}
	return out
}

var _ engine.BatchHook = (*hook)(nil)

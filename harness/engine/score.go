package engine

import (
	"fmt"
	"math"

	"sparsegate/harness/kernels"
)

// logitChunk bounds how many rows of logits exist at once (rows × vocabulary).
const logitChunk = 32

// targetLogProbs computes log P(target[i] | row i) for each hidden row with a
// target >= 0, writing into out[i]; rows with target < 0 are skipped. If
// argmax is non-nil it receives each scored row's most likely token.
func (m *Model) targetLogProbs(hidden []float32, targets []int, out []float64, argmax []int) error {
	d, V := m.Config.Hidden, m.Config.VocabSize
	logits := make([]float32, logitChunk*V)
	rows := make([]float32, 0, logitChunk*d)
	var which []int
	flush := func() error {
		n := len(which)
		if n == 0 {
			return nil
		}
		m.Logits(logits[:n*V], rows, n)
		for j, i := range which {
			l := logits[j*V : (j+1)*V]
			lse := kernels.LogSumExp(l)
			lp := float64(l[targets[i]]) - lse
			if math.IsNaN(lp) || math.IsInf(lp, 0) || math.IsInf(lse, 0) {
				return fmt.Errorf("row %d: %w (log-sum-exp %v): the weights or the activations hold NaN or Inf", i, ErrNonFinite, lse)
			}
			out[i] = lp
			if argmax != nil {
				argmax[i] = kernels.Argmax(l)
			}
		}
		rows, which = rows[:0], which[:0]
		return nil
	}
	for i, t := range targets {
		if t < 0 {
			continue
		}
		rows = append(rows, hidden[i*d:(i+1)*d]...)
		which = append(which, i)
		if len(which) == logitChunk {
			if err := flush(); err != nil {
				return err
			}
		}
	}
	return flush()
}

// LogProbs returns log P(tokens[i] | tokens[:i]) for i = 1 … len(tokens)-1 (the
// first token has no prediction: pass the BOS token first when the model
// expects one), from one forward pass. hook may be nil.
func (m *Model) LogProbs(tokens []int, hook Hook) ([]float64, error) {
	out, err := m.BatchLogProbs([][]int{tokens}, hook)
	if err != nil {
		return nil, err
	}
	return out[0], nil
}

// BatchLogProbs is LogProbs for several sequences run as one batch; each
// result is bit-identical to running its sequence alone.
func (m *Model) BatchLogProbs(seqs [][]int, hook Hook) ([][]float64, error) {
	sessions := make([]*Session, len(seqs))
	defer closeAll(sessions)
	var targets []int
	for b, s := range seqs {
		sessions[b] = m.NewSession()
		for i := range s {
			if i+1 < len(s) {
				targets = append(targets, s[i+1])
			} else {
				targets = append(targets, -1)
			}
		}
	}
	hidden, err := m.Forward(sessions, seqs, hook)
	if err != nil {
		return nil, err
	}
	lp := make([]float64, len(targets))
	if err := m.targetLogProbs(hidden, targets, lp, nil); err != nil {
		return nil, err
	}
	out := make([][]float64, len(seqs))
	off := 0
	for b, s := range seqs {
		if len(s) > 1 {
			out[b] = lp[off : off+len(s)-1]
		} else {
			out[b] = []float64{}
		}
		off += len(s)
	}
	return out, nil
}

// A ContinuationScore is the log-likelihood of a continuation given a context.
type ContinuationScore struct {
	// LogProb is the sum of the continuation tokens' log-probabilities.
	LogProb float64
	// TokenLogProbs holds each continuation token's log-probability.
	TokenLogProbs []float64
	// Greedy is true when every continuation token is the most likely next token.
	Greedy bool
}

// Continuations scores several continuations of one context: the context is
// run once, then all continuations as one batch on copies of its cache. A
// continuation must not be empty; the context must not be empty (pass the BOS
// token when the model expects one).
func (m *Model) Continuations(context []int, conts [][]int, hook Hook) ([]ContinuationScore, error) {
	if len(context) == 0 {
		return nil, fmt.Errorf("continuation scoring needs a non-empty context")
	}
	base := m.NewSession()
	defer base.Close()
	// The context's last row predicts each continuation's first token.
	hidden, err := m.Forward([]*Session{base}, [][]int{context}, hook)
	if err != nil {
		return nil, err
	}
	d := m.Config.Hidden
	last := hidden[(len(context)-1)*d:]
	sessions := make([]*Session, len(conts))
	defer closeAll(sessions)
	var targets []int
	var rows []float32
	for b, c := range conts {
		if len(c) == 0 {
			return nil, fmt.Errorf("continuation %d is empty", b)
		}
		sessions[b] = base.cloneWithRoom(len(c))
		rows = append(rows, last...)
		targets = append(targets, c[0])
		// Rows of the batch: token j predicts token j+1; the last predicts nothing.
	}
	inputs := make([][]int, len(conts))
	for b, c := range conts {
		inputs[b] = c[:len(c)-1]
	}
	h2, err := m.Forward(sessions, inputs, hook)
	if err != nil {
		return nil, err
	}
	rows = append(rows, h2...)
	for _, c := range conts {
		targets = append(targets, c[1:]...)
	}
	lp := make([]float64, len(targets))
	am := make([]int, len(targets))
	if err := m.targetLogProbs(rows, targets, lp, am); err != nil {
		return nil, err
	}
	out := make([]ContinuationScore, len(conts))
	off := len(conts) // rows after the first-token rows
	for b, c := range conts {
		tl := make([]float64, len(c))
		tl[0] = lp[b]
		greedy := am[b] == c[0]
		for j := 1; j < len(c); j++ {
			tl[j] = lp[off+j-1]
			greedy = greedy && am[off+j-1] == c[j]
		}
		off += len(c) - 1
		sum := 0.0
		for _, v := range tl {
			sum += v
		}
		out[b] = ContinuationScore{LogProb: sum, TokenLogProbs: tl, Greedy: greedy}
	}
	return out, nil
}

// Clone returns an independent copy of the session's cache.
func (s *Session) Clone() *Session { return s.cloneWithRoom(0) }

// cloneWithRoom is Clone with capacity for rows more positions in every
// layer's cache, so that appending them copies nothing again. The copy
// lives in a closed session's memory when the model holds one.
func (s *Session) cloneWithRoom(rows int) *Session {
	c := s.m.NewSession()
	c.n = s.n
	extra := rows * s.m.Config.KVHeads * s.m.Config.HeadDim
	for i := range s.k {
		c.k[i] = append(withRoom(c.k[i], len(s.k[i])+extra, 0), s.k[i]...)
		c.v[i] = append(withRoom(c.v[i], len(s.v[i])+extra, 0), s.v[i]...)
		if s.present[i] != nil {
			c.present[i] = append([]bool(nil), s.present[i]...)
		}
	}
	return c
}

// A Window is one forward pass of sliding-window scoring: tokens [Start, End)
// were run, and the targets [First, End) were scored in it.
type Window struct {
	Start, End, First int
}

// SlidingOptions configure sliding-window scoring.
type SlidingOptions struct {
	// Window is the most tokens one forward pass sees (2 … MaxPositions).
	Window int
	// Stride is how far each window starts after the previous (1 … Window-1).
	Stride int
	// Hook restricts units per token; nil runs dense.
	Hook Hook
	// Progress, when set, is called after each window with the number of
	// targets scored so far and the total.
	Progress func(scored, total int)
}

// SlidingLogProbs scores a long token sequence with a sliding window: windows
// of at most window tokens start every stride tokens, each run from scratch,
// and each target token is scored once, in the first window that holds it
// with at least one token of context, so every token but the first is scored
// exactly once. lp[i] is log P(tokens[i+1] | its window's tokens before it).
func (m *Model) SlidingLogProbs(tokens []int, opts SlidingOptions) (lp []float64, windows []Window, err error) {
	window, stride, hook := opts.Window, opts.Stride, opts.Hook
	if window < 2 || window > m.Config.MaxPositions {
		return nil, nil, fmt.Errorf("window %d must be between 2 and the model's %d positions", window, m.Config.MaxPositions)
	}
	if stride < 1 || stride >= window {
		return nil, nil, fmt.Errorf("stride %d must be at least 1 and less than the window %d", stride, window)
	}
	n := len(tokens)
	if n < 2 {
		return []float64{}, nil, nil
	}
	lp = make([]float64, n-1)
	scored := 1 // next target index to score
	for start := 0; scored < n; start += stride {
		end := min(start+window, n)
		if end <= scored {
			continue
		}
		first := max(scored, start+1)
		seq := tokens[start:end]
		s := m.NewSession()
		hidden, err := m.Forward([]*Session{s}, [][]int{seq[:len(seq)-1]}, hook)
		s.Close() // the window's cache is not needed past its forward pass
		if err != nil {
			return nil, nil, fmt.Errorf("window [%d,%d): %w", start, end, err)
		}
		targets := make([]int, len(seq)-1)
		for i := range targets {
			t := start + i + 1
			if t >= first {
				targets[i] = tokens[t]
			} else {
				targets[i] = -1
			}
		}
		wl := make([]float64, len(targets))
		if err := m.targetLogProbs(hidden, targets, wl, nil); err != nil {
			return nil, nil, fmt.Errorf("window [%d,%d): %w", start, end, err)
		}
		for i, t := range targets {
			if t >= 0 {
				lp[start+i] = wl[i]
			}
		}
		windows = append(windows, Window{Start: start, End: end, First: first})
		scored = end
		if opts.Progress != nil {
			opts.Progress(scored-1, n-1)
		}
	}
	return lp, windows, nil
}

// closeAll closes every session of ss that was made.
func closeAll(ss []*Session) {
	for _, s := range ss {
		if s != nil {
			s.Close()
		}
	}
}

package runner

import (
	"fmt"
	"math"

	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
	"sparsegate/harness/results"
	"sparsegate/harness/sparsity"
)

func windowID(i int) string { return fmt.Sprintf("w%04d", i) }

// targetBytes returns the text bytes a target token stands for (0 for
// special tokens), so bits per byte counts text only.
func targetBytes(m *engine.Model, id int) int {
	tok := m.Tokenizer
	for _, f := range []func() (int, bool){tok.BOS, tok.EOS, tok.PAD} {
		if s, ok := f(); ok && s == id {
			return 0
		}
	}
	return len(tok.TokenBytes(id))
}

func (rc *runCtx) perplexity(pp *prepared, pr *results.Probe) error {
	if cached, ok := rc.cached(pp, pr); ok {
		pr.Items = cached.Items
		return nil
	}
	t := rc.subject
	m := t.Model
	items := make([]results.Item, len(pp.windows))
	ran := make([]bool, len(pp.windows))
	pc := &progressCounter{total: len(pp.windows), prog: rc.progress(pp.probe.Name)}
	err := forEach(lanes(t, len(pp.windows)), len(pp.windows), func(l lane, wi int) error {
		w := pp.windows[wi]
		id := windowID(wi)
		if !inShard(rc.opts.Shard, pp.probe.Name, id) {
			pc.step()
			return nil
		}
		lp, err := rc.windowLogProbs(t, l.model, pp, wi, l.hook)
		if err != nil {
			return fmt.Errorf("window %s (tokens %d–%d): %w", id, w.start, w.end, err)
		}
		nll, nbytes := 0.0, 0
		for tgt := w.first; tgt < w.end; tgt++ {
			nll -= lp[tgt-w.start-1]
			nbytes += targetBytes(m, pp.tokens[tgt])
		}
		n := w.end - w.first
		items[wi], ran[wi] = results.Item{ID: id, Index: wi, NLL: &nll, Tokens: &n, Bytes: &nbytes}, true
		pc.step()
		return nil
	})
	if err != nil {
		return err
	}
	for wi, ok := range ran {
		if ok {
			pr.Items = append(pr.Items, items[wi])
		}
	}
	rc.store(pp, pr)
	return nil
}

// rowLogits runs seq[:len-1] and returns the logits of every row.
func rowLogits(m *engine.Model, hook engine.Hook, seq []int) ([]float32, error) {
	s := m.NewSession()
	hidden, err := m.Forward([]*engine.Session{s}, [][]int{seq[:len(seq)-1]}, hook)
	s.Close() // only the logits of the rows are needed
	if err != nil {
		return nil, err
	}
	rows := len(seq) - 1
	logits := make([]float32, rows*m.Config.VocabSize)
	m.Logits(logits, hidden, rows)
	return logits, nil
}

// prefixOf returns the base's dense prefix of window wi for a target whose
// layers before DenseBefore are dense, or nil when there is none to use.
func (rc *runCtx) prefixOf(t *Target, pp *prepared, wi int) (*engine.Prefix, error) {
	if t.DenseBefore <= 0 || t.DenseBefore >= t.Model.Config.Layers || rc.opts.Memo == nil || rc.base == nil {
		return nil, nil
	}
	w := pp.windows[wi]
	k := fmt.Sprintf("%s\x00%s\x00%d\x00%d", rc.base.Info.WeightsHash, pp.probe.Hash, wi, t.DenseBefore)
	return rc.opts.Memo.prefix(k, func() (*engine.Prefix, error) {
		return t.Model.DensePrefix(pp.tokens[w.start:w.end-1], t.DenseBefore)
	})
}

// windowLogProbs scores window wi on target t, run on m (t's model or a
// view of it), from a dense prefix when the target allows one (the same
// bits either way).
func (rc *runCtx) windowLogProbs(t *Target, m *engine.Model, pp *prepared, wi int, hook engine.Hook) ([]float64, error) {
	w := pp.windows[wi]
	p, err := rc.prefixOf(t, pp, wi)
	if err != nil || p == nil {
		if err != nil {
			return nil, err
		}
		return m.LogProbs(pp.tokens[w.start:w.end], hook)
	}
	return m.LogProbsFrom(pp.tokens[w.start:w.end], p, hook)
}

// windowLogits is rowLogits of window wi, from a dense prefix when allowed.
func (rc *runCtx) windowLogits(t *Target, pp *prepared, wi int, hook engine.Hook) ([]float32, error) {
	w := pp.windows[wi]
	seq := pp.tokens[w.start:w.end]
	p, err := rc.prefixOf(t, pp, wi)
	if err != nil {
		return nil, err
	}
	if p == nil {
		return rowLogits(t.Model, hook, seq)
	}
	hidden, err := t.Model.ForwardFrom(seq[:len(seq)-1], p, hook)
	if err != nil {
		return nil, err
	}
	rows := len(seq) - 1
	logits := make([]float32, rows*t.Model.Config.VocabSize)
	t.Model.Logits(logits, hidden, rows)
	return logits, nil
}

// logSoftmax writes ln softmax(x) into dst in float64.
func logSoftmax(dst []float64, x []float32) error {
	lse := kernels.LogSumExp(x)
	if math.IsNaN(lse) || math.IsInf(lse, 0) {
		return fmt.Errorf("%w (log-sum-exp %v): the weights or the activations hold NaN or Inf", engine.ErrNonFinite, lse)
	}
	for i, v := range x {
		dst[i] = float64(v) - lse
	}
	return nil
}

// KL returns KL(p ‖ q) = Σ p_i (ln p_i − ln q_i) for log-probabilities lp
// and lq, summed in index order; terms with p_i = 0 contribute 0.
func KL(lp, lq []float64) float64 {
	s := 0.0
	for i, a := range lp {
		p := math.Exp(a)
		if p == 0 {
			continue
		}
		s += p * (a - lq[i])
	}
	return s
}

func (rc *runCtx) drift(pp *prepared, pr *results.Probe) error {
	b, c := rc.base, rc.cand
	bh, ch := b.hook(nil, false), c.hook(nil, false)
	V := b.Model.Config.VocabSize
	lb, lc := make([]float64, V), make([]float64, V)
	prog := rc.progress(pp.probe.Name)
	for wi, w := range pp.windows {
		id := windowID(wi)
		if !inShard(rc.opts.Shard, pp.probe.Name, id) {
			continue
		}
		seq := pp.tokens[w.start:w.end]
		mk := cacheKey(b, pp.probe.Hash, results.Shard{}) + "/" + id
		xb, ok := rc.opts.Memo.logitsFor(mk)
		if !ok {
			var err error
			if xb, err = rowLogits(b.Model, bh, seq); err != nil {
				return fmt.Errorf("window %s, base: %w", id, err)
			}
			rc.opts.Memo.putLogits(mk, xb)
		}
		xc, err := rc.windowLogits(c, pp, wi, ch)
		if err != nil {
			return fmt.Errorf("window %s, candidate: %w", id, err)
		}
		it := results.Item{ID: id, Index: wi, KL: []float64{}}
		agree := 0
		for tgt := w.first; tgt < w.end; tgt++ {
			row := tgt - w.start - 1
			rb, rcand := xb[row*V:(row+1)*V], xc[row*V:(row+1)*V]
			if err := logSoftmax(lb, rb); err != nil {
				return fmt.Errorf("window %s, base, token %d: %w", id, tgt, err)
			}
			if err := logSoftmax(lc, rcand); err != nil {
				return fmt.Errorf("window %s, candidate, token %d: %w", id, tgt, err)
			}
			it.KL = append(it.KL, max(0, KL(lb, lc)))
			if kernels.Argmax(rb) == kernels.Argmax(rcand) {
				agree++
			}
		}
		it.Agree = &agree
		pr.Items = append(pr.Items, it)
		prog(wi+1, len(pp.windows))
	}
	return nil
}

func (rc *runCtx) sparsity(pp *prepared, pr *results.Probe) error {
	c := rc.cand
	stats := sparsity.NewStats()
	hook := c.hook(stats, true)
	prog := rc.progress(pp.probe.Name)
	for wi, w := range pp.windows {
		s := c.Model.NewSession()
		_, err := c.Model.Forward([]*engine.Session{s}, [][]int{pp.tokens[w.start : w.end-1]}, hook)
		s.Close()
		if err != nil {
			return fmt.Errorf("window %s: %w", windowID(wi), err)
		}
		prog(wi+1, len(pp.windows))
	}
	var sums [2]float64
	var counts [2]int
	var rsum [2]float64
	var rcount [2]int
	var all []sparsity.Unit
	for l := range c.Model.Config.Layers {
		for _, comp := range sparsity.Components() {
			all = append(all, sparsity.Unit{Layer: l, Component: comp})
		}
	}
	for _, u := range all {
		ci := 0
		if u.Component == sparsity.Attention {
			ci = 1
		}
		kept := 1.0
		if _, ok := stats.Unit(u); ok {
			kept = stats.KeptFraction(u)
		}
		ru := results.Unit{Layer: u.Layer, Component: string(u.Component), Rule: c.Build.Rule(u).String(), Kept: kept}
		if c.Dense[u] {
			ru.Rule = "dense (forced)"
		}
		if rec, ok := stats.Recall(u); ok && c.Build.Rule(u).Mode != sparsity.Dense && !c.Dense[u] {
			ru.Recall = &rec
			rsum[ci] += rec
			rcount[ci]++
		}
		sums[ci] += kept
		counts[ci]++
		pr.Units = append(pr.Units, ru)
	}
	names := [2]string{"mlp", "attention"}
	for ci := range 2 {
		if counts[ci] > 0 {
			pr.Metrics = append(pr.Metrics, results.Metric{Name: "kept_" + names[ci], Value: sums[ci] / float64(counts[ci])})
		}
		if rcount[ci] > 0 {
			pr.Metrics = append(pr.Metrics, results.Metric{Name: "recall_" + names[ci], Value: rsum[ci] / float64(rcount[ci])})
		}
	}
	return nil
}

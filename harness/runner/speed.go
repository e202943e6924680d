package runner

import (
	"fmt"
	"slices"
	"time"

	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
	"sparsegate/harness/results"
)

// speed measures prefill and decode tokens/s of base and candidate in the
// same run: Repeats rounds, each timing both builds (alternating which goes
// first), and reports the medians and their ratios. The only
// non-deterministic metrics of a suite.
func (rc *runCtx) speed(pp *prepared, pr *results.Probe) error {
	targets := [2]*Target{rc.base, rc.cand}
	var prefill, decode [2][]float64
	prog := rc.progress(pp.probe.Name)
	for r := range pp.probe.Repeats {
		order := [2]int{0, 1}
		if r%2 == 1 {
			order = [2]int{1, 0}
		}
		for _, ti := range order {
			p, d, err := rc.timeOne(targets[ti], pp.prompt, pp.probe.MaxTokens)
			if err != nil {
				return fmt.Errorf("%s: %w", []string{"base", "candidate"}[ti], err)
			}
			prefill[ti] = append(prefill[ti], p)
			decode[ti] = append(decode[ti], d)
		}
		prog(r+1, pp.probe.Repeats)
	}
	bp, bd, cp, cd := median(prefill[0]), median(decode[0]), median(prefill[1]), median(decode[1])
	for _, m := range []results.Metric{
		{Name: "base_prefill_tps", Value: bp}, {Name: "base_decode_tps", Value: bd},
		{Name: "candidate_prefill_tps", Value: cp}, {Name: "candidate_decode_tps", Value: cd},
		{Name: "prefill_speedup", Value: cp / bp}, {Name: "decode_speedup", Value: cd / bd},
	} {
		m.Nondeterministic = true
		pr.Metrics = append(pr.Metrics, m)
	}
	return nil
}

// timeOne returns prefill and decode tokens/s of one build: the prompt in
// one forward pass, then n greedy tokens one at a time on its cache.
func (rc *runCtx) timeOne(t *Target, prompt []int, n int) (prefill, decode float64, err error) {
	m := t.Model
	hook := t.hook(nil, false)
	s := m.NewSession()
	defer s.Close()
	logits := make([]float32, m.Config.VocabSize)
	t0 := rc.opts.Now()
	hidden, err := m.Forward([]*engine.Session{s}, [][]int{prompt}, hook)
	if err != nil {
		return 0, 0, err
	}
	d := m.Config.Hidden
	m.Logits(logits, hidden[(len(prompt)-1)*d:], 1)
	t1 := rc.opts.Now()
	for range n {
		next := kernels.Argmax(logits)
		h, err := m.Forward([]*engine.Session{s}, [][]int{{next}}, hook)
		if err != nil {
			return 0, 0, err
		}
		m.Logits(logits, h, 1)
	}
	t2 := rc.opts.Now()
	return float64(len(prompt)) / seconds(t1.Sub(t0)), float64(n) / seconds(t2.Sub(t1)), nil
}

func seconds(d time.Duration) float64 { return max(d.Seconds(), 1e-9) }

func median(v []float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

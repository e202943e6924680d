package runner

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

// Recompute sets a probe's metrics from its item records, summing in item
// order (perplexity, choice, generation, drift, flips); sparsity and speed
// metrics are kept as measured. Metrics end sorted by name. A NaN or
// infinite metric is an error.
func Recompute(p *results.Probe) error {
	var ms []results.Metric
	add := func(name string, v float64) { ms = append(ms, results.Metric{Name: name, Value: v}) }
	n := float64(len(p.Items))
	switch p.Kind {
	case suites.Perplexity:
		nll, tok, by := 0.0, 0, 0
		for _, it := range p.Items {
			if it.NLL == nil || it.Tokens == nil || it.Bytes == nil {
				return fmt.Errorf("window %s has no nll, tokens or bytes", it.ID)
			}
			nll += *it.NLL
			tok += *it.Tokens
			by += *it.Bytes
		}
		if tok > 0 {
			add("mean_nll", nll/float64(tok))
			add("perplexity", math.Exp(nll/float64(tok)))
		}
		if by > 0 {
			add("bits_per_byte", nll/(math.Ln2*float64(by)))
		}
	case suites.Choice, suites.Generation:
		right, prefix, margin := 0, 0, 0.0
		for _, it := range p.Items {
			if it.Correct == nil {
				return fmt.Errorf("item %s has no outcome", it.ID)
			}
			if *it.Correct {
				right++
			}
			if it.Prefix != nil && *it.Prefix {
				prefix++
			}
			if it.Margin != nil {
				margin += *it.Margin
			}
		}
		if n > 0 {
			if p.Kind == suites.Choice {
				add("accuracy", float64(right)/n)
				add("margin_mean", margin/n)
			} else {
				add("exact_match", float64(right)/n)
				add("prefix_match", float64(prefix)/n)
			}
		}
	case suites.Drift:
		var all []float64
		agree, sum := 0, 0.0
		for _, it := range p.Items {
			for _, v := range it.KL {
				sum += v
			}
			all = append(all, it.KL...)
			if it.Agree != nil {
				agree += *it.Agree
			}
		}
		if len(all) > 0 {
			add("kl_mean", sum/float64(len(all)))
			add("kl_p95", NearestRank(all, 0.95))
			add("top1_agreement", float64(agree)/float64(len(all)))
		}
	case suites.Flips:
		lost, gained := 0, 0
		for _, it := range p.Items {
			if it.Correct == nil || it.BaseCorrect == nil {
				return fmt.Errorf("item %s lacks an outcome", it.ID)
			}
			switch {
			case *it.BaseCorrect && !*it.Correct:
				lost++
			case !*it.BaseCorrect && *it.Correct:
				gained++
			}
		}
		add("lost", float64(lost))
		add("gained", float64(gained))
		if n > 0 {
			add("flip_rate", float64(lost+gained)/n)
		}
	default:
		ms = p.Metrics
	}
	slices.SortFunc(ms, func(a, b results.Metric) int { return cmp.Compare(a.Name, b.Name) })
	for _, m := range ms {
		if math.IsNaN(m.Value) || math.IsInf(m.Value, 0) {
			return fmt.Errorf("metric %s is %v", m.Name, m.Value)
		}
	}
	p.Metrics = ms
	return nil
}

// NearestRank returns the q-quantile of v by the nearest-rank method: the
// ⌈q·n⌉-th smallest value (common practice, no source).
func NearestRank(v []float64, q float64) float64 {
	s := slices.Clone(v)
	slices.Sort(s)
	k := int(math.Ceil(q*float64(len(s)))) - 1
	return s[min(max(k, 0), len(s)-1)]
}

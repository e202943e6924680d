package suites

import "slices"

// Directions of a metric: which way is better.
const (
	HigherIsBetter = "higher"
	LowerIsBetter  = "lower"
)

// Statistical tests a tolerance can ask for.
const (
	TestNone      = "none"      // bounds only
	TestMcNemar   = "mcnemar"   // exact McNemar test on per-item outcomes (binary metrics)
	TestBootstrap = "bootstrap" // paired bootstrap over windows (perplexity metrics)
)

// When a regression fails the gate.
const (
	FailIfLarge       = "large"       // beyond the bounds
	FailIfSignificant = "significant" // the test calls it significant
	FailIfBoth        = "both"        // beyond the bounds and significant
	FailIfEither      = "either"      // beyond the bounds or significant
)

// A MetricInfo describes one metric a probe kind produces.
type MetricInfo struct {
	// Name is the metric's name, as suites and golden files spell it.
	Name string
	// Kind is the probe kind that produces it.
	Kind string
	// Better is HigherIsBetter or LowerIsBetter.
	Better string
	// Tests lists the statistical tests that apply (besides TestNone).
	Tests []string
	// Abs and Rel are the default bounds on a worsening.
	Abs, Rel float64
	// Nondeterministic marks measured timings: golden files keep them with a
	// wide tolerance and reporters say so.
	Nondeterministic bool
	// Doc says what the metric is, in one line.
	Doc string
}

var catalogue = []MetricInfo{
	{"perplexity", Perplexity, LowerIsBetter, []string{TestBootstrap}, 0, 0.02, false, "exp(mean NLL) over the scored tokens"},
	{"mean_nll", Perplexity, LowerIsBetter, []string{TestBootstrap}, 0.02, 0, false, "mean negative log-likelihood per scored token, nats"},
	{"bits_per_byte", Perplexity, LowerIsBetter, []string{TestBootstrap}, 0, 0.02, false, "total NLL / (ln 2 · scored bytes)"},
	{"accuracy", Choice, HigherIsBetter, []string{TestMcNemar}, 0.02, 0, false, "fraction of items whose best-scored option is the answer"},
	{"margin_mean", Choice, HigherIsBetter, nil, 0.5, 0, false, "mean score gap between the best and second-best option"},
	{"exact_match", Generation, HigherIsBetter, []string{TestMcNemar}, 0.02, 0, false, "fraction of items whose generated text equals the target"},
	{"prefix_match", Generation, HigherIsBetter, []string{TestMcNemar}, 0.02, 0, false, "fraction of items whose generated text starts with the target"},
	{"kl_mean", Drift, LowerIsBetter, nil, 0.01, 0.1, false, "mean per-token KL(base ‖ candidate), nats"},
	{"kl_p95", Drift, LowerIsBetter, nil, 0.02, 0.1, false, "95th percentile of per-token KL(base ‖ candidate), nats"},
	{"top1_agreement", Drift, HigherIsBetter, nil, 0.02, 0, false, "fraction of tokens where base and candidate agree on the most likely next token"},
	{"lost", Flips, LowerIsBetter, nil, 3, 0, false, "items right on the base and wrong on the candidate"},
	{"gained", Flips, HigherIsBetter, nil, 3, 0, false, "items wrong on the base and right on the candidate"},
	{"flip_rate", Flips, LowerIsBetter, nil, 0.02, 0, false, "(lost + gained) / items compared"},
	{"kept_mlp", Sparsity, LowerIsBetter, nil, 0.01, 0, false, "mean fraction of MLP neurons computed per token, over layers"},
	{"kept_attention", Sparsity, LowerIsBetter, nil, 0.01, 0, false, "mean fraction of attention heads computed per token, over layers"},
	{"recall_mlp", Sparsity, HigherIsBetter, nil, 0.02, 0, false, "kept MLP neurons that are also in the oracle top-k of the same size"},
	{"recall_attention", Sparsity, HigherIsBetter, nil, 0.02, 0, false, "kept heads that are also in the oracle top-k of the same size"},
	{"prefill_speedup", Speed, HigherIsBetter, nil, 0, 0.5, true, "candidate prefill tokens/s ÷ base prefill tokens/s"},
	{"decode_speedup", Speed, HigherIsBetter, nil, 0, 0.5, true, "candidate decode tokens/s ÷ base decode tokens/s"},
	{"base_prefill_tps", Speed, HigherIsBetter, nil, 0, 0.5, true, "base prefill tokens/s (median of repeats)"},
	{"base_decode_tps", Speed, HigherIsBetter, nil, 0, 0.5, true, "base decode tokens/s (median of repeats)"},
	{"candidate_prefill_tps", Speed, HigherIsBetter, nil, 0, 0.5, true, "candidate prefill tokens/s (median of repeats)"},
	{"candidate_decode_tps", Speed, HigherIsBetter, nil, 0, 0.5, true, "candidate decode tokens/s (median of repeats)"},
}

// Metrics returns the metrics of a probe kind, in documentation order (all
// metrics when kind is "").
func Metrics(kind string) []MetricInfo {
	var out []MetricInfo
	for _, m := range catalogue {
		if kind == "" || m.Kind == kind {
			out = append(out, m)
		}
	}
	return out
}

// Metric returns the description of a metric of a kind.
func Metric(kind, name string) (MetricInfo, bool) {
	for _, m := range catalogue {
		if m.Kind == kind && m.Name == name {
			return m, true
		}
	}
	return MetricInfo{}, false
}

// A Tolerance says how far a gated metric may move from its golden value, in
// which direction, and whether a statistical test must agree.
//
// A candidate value c against a golden value g is *worse by* w = g − c when
// higher is better and c − g when lower is better. The move is *large* when
// w > max(Abs, Rel·|g|) and an *improvement* when −w > max(Abs, Rel·|g|).
// FailIf says whether a large move, a significant one, both or either fails.
type Tolerance struct {
	// Metric is the gated metric's name.
	Metric string
	// Better is HigherIsBetter or LowerIsBetter (the metric's own by default).
	Better string
	// Abs and Rel bound a worsening (and define an improvement).
	Abs, Rel float64
	// MaxFlips caps the items that went from right to wrong against the
	// golden per-item outcomes (-1: no cap).
	MaxFlips int
	// MaxFlipFraction caps the same as a fraction of the items (-1: no cap).
	MaxFlipFraction float64
	// Test is TestNone, TestMcNemar or TestBootstrap.
	Test string
	// Alpha is the test's significance level.
	Alpha float64
	// Power is the power the power warning asks for.
	Power float64
	// Resamples is the bootstrap's resample count.
	Resamples int
	// FailIf is one of the FailIf constants.
	FailIf string
	// Line and Col locate the tolerance in the suite file (0 for defaults).
	Line, Col int
}

// DefaultTolerance returns the tolerance a metric gets when the suite names
// it without fields: the metric's default bounds, no flip cap, no test.
func DefaultTolerance(m MetricInfo) Tolerance {
	return Tolerance{Metric: m.Name, Better: m.Better, Abs: m.Abs, Rel: m.Rel, MaxFlips: -1, MaxFlipFraction: -1,
		Test: TestNone, Alpha: 0.05, Power: 0.8, Resamples: 2000, FailIf: FailIfLarge}
}

// Bound returns the allowed worsening of a metric whose golden value is g.
func (t *Tolerance) Bound(g float64) float64 {
	r := t.Rel * g
	if r < 0 {
		r = -r
	}
	return max(t.Abs, r)
}

// WorseBy returns how much worse candidate c is than golden g (negative for
// a better value).
func (t *Tolerance) WorseBy(g, c float64) float64 {
	if t.Better == HigherIsBetter {
		return g - c
	}
	return c - g
}

func knownTest(m MetricInfo, test string) bool {
	return test == TestNone || slices.Contains(m.Tests, test)
}

package reporters

import (
	"fmt"

	"sparsegate/golden"
	"sparsegate/harness/results"
)

func fp(x float64) *float64 { return &x }
func ip(x int) *int         { return &x }
func sp(s string) *string   { return &s }

// metric builds a gated metric verdict; delta is computed from the values.
func metric(name string, o golden.Outcome, better string, g, c, bound float64, tol string) *golden.MetricVerdict {
	return &golden.MetricVerdict{Metric: name, Outcome: o, Gated: true, Better: better,
		Golden: fp(g), Candidate: fp(c), Delta: fp(c - g), Bound: bound, Tolerance: tol}
}

// failingVerdict is a hand-built verdict of a failing suite with every kind
// of probe block the reporters draw: a failing choice probe with lost and
// gained items, a failing generation probe with text changes and a power
// warning, an improved perplexity probe with a window move, a passing
// sparsity probe with units, a passing speed probe with timings, an error
// probe, a skipped probe, a new probe, and sensitivity rows.
func failingVerdict() *golden.Verdict {
	acc := metric("accuracy", golden.Fail, "higher", 0.82, 0.775, 0.02, "abs 0.02, mcnemar α=0.05, fail if both")
	acc.Test, acc.Statistic, acc.P, acc.Lost, acc.Gained = "mcnemar", fp(6.25), fp(0.0124), 12, 3
	acc.Note = "dropped 0.045, beyond 0.02, and significant (p 0.0124 < 0.05)"
	margin := metric("margin_mean", golden.Pass, "higher", 2.1, 1.95, 0.5, "abs 0.5")

	em := metric("exact_match", golden.Fail, "higher", 0.625, 0.5625, 0.02, "abs 0.02, mcnemar α=0.05, fail if both")
	em.Test, em.P, em.Lost, em.Gained = "mcnemar", fp(0.0313), 4, 1
	em.PowerWarning = "48 items detect a drop of 0.09 at power 0.8; the tolerance is 0.02"
	pm := metric("prefix_match", golden.Pass, "higher", 0.75, 0.7604, 0.02, "abs 0.02")

	ppl := metric("perplexity", golden.Improved, "lower", 18.42, 17.9, 0.3684, "rel 0.02, bootstrap α=0.05")
	ppl.Test, ppl.P, ppl.CILo, ppl.CIHi = "bootstrap", fp(0.002), fp(-0.71), fp(-0.33)
	nll := metric("mean_nll", golden.Pass, "lower", 2.9134, 2.9001, 0.02, "abs 0.02")

	var units []results.Unit
	for l := 0; l < 4; l++ {
		units = append(units,
			results.Unit{Layer: l, Component: "mlp", Rule: "predictor top 30%", Kept: 0.3 + 0.01*float64(l), Recall: fp(0.93 - 0.01*float64(l))},
			results.Unit{Layer: l, Component: "attention", Rule: "dense", Kept: 1})
	}
	units[7] = results.Unit{Layer: 3, Component: "attention", Rule: "oracle top 50%", Kept: 0.5, Recall: fp(1)}

	prefill := metric("prefill_speedup", golden.Pass, "higher", 1.84, 1.71, 0.92, "rel 0.5")
	prefill.Nondeterministic = true
	basetps := &golden.MetricVerdict{Metric: "base_prefill_tps", Outcome: golden.Pass, Better: "higher",
		Golden: fp(812), Candidate: fp(790), Delta: fp(-22), Bound: 406, Tolerance: "rel 0.5", Nondeterministic: true}

	news := &golden.MetricVerdict{Metric: "accuracy", Outcome: golden.New, Gated: true, Better: "higher",
		Candidate: fp(0.7), Bound: 0.02, Tolerance: "abs 0.02", Note: "no golden value; run sparsegate golden update after review"}

	var sens []golden.Sensitivity
	for l := 0; l < 4; l++ {
		for _, c := range []string{"mlp", "attention"} {
			d := -0.002 * float64(l+1)
			if c == "attention" {
				d = 0.001 * float64(l)
			}
			sens = append(sens, golden.Sensitivity{Probe: "lookup-mc", Metric: "accuracy", Layer: l, Component: c,
				Mode: "only-sparse", Value: 0.82 + d, Delta: d})
		}
	}
	sens[4].Delta, sens[4].Value = -0.03, 0.79 // layer 2 mlp is the culprit

	return &golden.Verdict{
		Schema: golden.VerdictSchema, Harness: "sparsegate 0.4.0",
		Suite:     results.SuiteRef{Name: "demo", File: "suites/demo/gate.yaml", Hash: "sha256:ab12cd34"},
		GoldenDir: "golden/demo", Outcome: golden.Error, Passed: false,
		Fingerprint: golden.Fingerprint{BaseWeights: "sha256:1111aaaa", CandidateWeights: "sha256:2222bbbb",
			Manifest: "sha256:3333cccc", Suite: "sha256:ab12cd34", Tokenizer: "sha256:4444dddd", Harness: "sparsegate 0.4.0"},
		GoldenFingerprint: &golden.Fingerprint{BaseWeights: "sha256:1111aaaa", CandidateWeights: "sha256:2222bbbb",
			Suite: "sha256:ab12cd34", Harness: "sparsegate 0.3.9"},
		Shard: results.Shard{Index: 1, Count: 1},
		Probes: []*golden.ProbeVerdict{
			{Name: "lookup-mc", Kind: "choice", Outcome: golden.Fail, Seconds: 12.5, Items: 200,
				Metrics: []*golden.MetricVerdict{acc, margin},
				Changes: []golden.ItemChange{
					{ID: "q017", Index: 17, Change: golden.Lost, GoldenChosen: ip(2), CandidateChosen: ip(0), GoldenMargin: fp(1.25), CandidateMargin: fp(0.4)},
					{ID: "q042", Index: 42, Change: golden.Gained, GoldenChosen: ip(1), CandidateChosen: ip(3), GoldenMargin: fp(0.3), CandidateMargin: fp(0.8)},
					{ID: "q101", Index: 101, Change: golden.Changed, GoldenChosen: ip(0), CandidateChosen: ip(2), GoldenMargin: fp(0.1), CandidateMargin: fp(0.2)},
				}},
			{Name: "weather-gen", Kind: "generation", Outcome: golden.Fail, Seconds: 30.001, Items: 48,
				Metrics: []*golden.MetricVerdict{em, pm},
				Changes: []golden.ItemChange{
					{ID: "g007", Index: 7, Change: golden.Lost,
						GoldenText:    sp("Rain at first, clearing by noon.\nWinds light."),
						CandidateText: sp("Heavy rain all day.\nWinds light.")},
					{ID: "g012", Index: 12, Change: golden.Changed,
						GoldenText: sp("Fog in the harbour"), CandidateText: sp("Fog in the \x1b[2Jharbour")},
				}},
			{Name: "heldout-ppl", Kind: "perplexity", Outcome: golden.Improved, Seconds: 8.25, Items: 64,
				Metrics: []*golden.MetricVerdict{ppl, nll},
				Changes: []golden.ItemChange{
					{ID: "w0003", Index: 3, Change: golden.Moved, GoldenNLL: fp(812.5), CandidateNLL: fp(790.25)},
				}},
			{Name: "sparsity", Kind: "sparsity", Outcome: golden.Pass, Seconds: 2, Items: 16,
				Metrics: []*golden.MetricVerdict{
					metric("kept_mlp", golden.Pass, "lower", 0.31, 0.315, 0.01, "abs 0.01"),
					metric("recall_mlp", golden.Pass, "higher", 0.91, 0.905, 0.02, "abs 0.02"),
				},
				Units: units},
			{Name: "speed", Kind: "speed", Outcome: golden.Pass, Seconds: 40, Items: 3,
				Metrics: []*golden.MetricVerdict{prefill, basetps}},
			{Name: "drift", Kind: "drift", Outcome: golden.Error, Seconds: 0.5,
				Note: `engine: layer 3 mask has 64 entries, the layer has 96 neurons; rebuild the manifest`},
			{Name: "flips", Kind: "flips", Outcome: golden.Skipped, Note: "needs the base build (--base)"},
			{Name: "news-mc", Kind: "choice", Outcome: golden.New, Seconds: 3, Items: 50,
				Metrics: []*golden.MetricVerdict{news}},
		},
		Sensitivity: sens,
	}
}

// passingVerdict is a verdict where every probe passes.
func passingVerdict() *golden.Verdict {
	v := &golden.Verdict{
		Schema: golden.VerdictSchema, Harness: "sparsegate 0.4.0",
		Suite:     results.SuiteRef{Name: "demo", File: "suites/demo/gate.yaml", Hash: "sha256:ab12cd34"},
		GoldenDir: "golden/demo", Outcome: golden.Pass, Passed: true,
		Fingerprint: golden.Fingerprint{BaseWeights: "sha256:1111aaaa", CandidateWeights: "sha256:2222bbbb",
			Suite: "sha256:ab12cd34", Harness: "sparsegate 0.4.0"},
		Shard: results.Shard{Index: 2, Count: 3},
		Probes: []*golden.ProbeVerdict{
			{Name: "lookup-mc", Kind: "choice", Outcome: golden.Pass, Seconds: 1.25, Items: 100,
				Metrics: []*golden.MetricVerdict{metric("accuracy", golden.Pass, "higher", 0.8, 0.79, 0.02, "abs 0.02")}},
			{Name: "sparsity", Kind: "sparsity", Outcome: golden.Pass, Seconds: 0.75, Items: 16,
				Metrics: []*golden.MetricVerdict{metric("kept_mlp", golden.Pass, "lower", 0.31, 0.31, 0.01, "abs 0.01")},
				Units: []results.Unit{
					{Layer: 0, Component: "mlp", Kept: 0.3}, {Layer: 0, Component: "attention", Kept: 1},
					{Layer: 1, Component: "mlp", Kept: 0.32}, {Layer: 1, Component: "attention", Kept: 1},
				}},
		},
	}
	return v
}

// bigVerdict is a failing verdict with n probes, every one failing with a
// power warning and names of nameLen bytes.
func bigVerdict(n, nameLen int) *golden.Verdict {
	v := failingVerdict()
	v.Probes = nil
	for i := 0; i < n; i++ {
		name := fmt.Sprintf("probe-%05d", i)
		for len(name) < nameLen {
			name += "-ü|*"
		}
		m := metric("accuracy", golden.Fail, "higher", 0.8, 0.7, 0.02, "abs 0.02, mcnemar α=0.05, fail if both")
		m.P = fp(0.001)
		m.PowerWarning = "20 items detect a drop of 0.2 at power 0.8"
		v.Probes = append(v.Probes, &golden.ProbeVerdict{Name: name, Kind: "choice", Outcome: golden.Fail,
			Seconds: 0.1, Items: 20, Metrics: []*golden.MetricVerdict{m},
			Note: name})
	}
	return v
}

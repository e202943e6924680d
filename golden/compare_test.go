package golden

import (
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"
	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/harness/stats"
	"sparsegate/harness/version"
	"sparsegate/suites"
)

// approx compares floats x and y as equal when
// |x−y| ≤ max(rel·min(|x|,|y|), abs), here rel 1e-12 and abs 1e-15: the
// verdict's deltas come from float subtraction, so exact equality would test
// rounding, not the comparison.
var approx = cmpopts.EquateApprox(1e-12, 1e-15)

func TestComparePassStructure(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}"))
	gold := bools(100, 90)
	gr := newResults(s, choiceProbe(t, "mc", gold))
	cr := newResults(s, choiceProbe(t, "mc", flip(gold, 0))) // 89 of 100: worse by 0.01
	dir := filepath.Join(t.TempDir(), "golden")
	record(t, dir, gr)
	v, err := Compare(s, cr, dir, Options{})
	require.NoError(t, err)

	gfp := FingerprintOf(gr, nil)
	want := &Verdict{
		Schema: VerdictSchema, Harness: version.Version, Suite: cr.Suite, GoldenDir: dir, Outcome: Pass, Passed: true,
		Fingerprint: FingerprintOf(cr, nil), GoldenFingerprint: &gfp, Shard: results.Shard{Index: 1, Count: 1},
		Probes: []*ProbeVerdict{{
			Name: "mc", Kind: suites.Choice, Outcome: Pass, Items: 100,
			Metrics: []*MetricVerdict{
				{Metric: "accuracy", Outcome: Pass, Gated: true, Better: suites.HigherIsBetter, Golden: ptr(0.9), Candidate: ptr(0.89),
					Delta: ptr(-0.01), Bound: 0.02, Tolerance: "higher is better; worse by at most max(abs 0.02, rel 0·|golden|), fails if large",
					Lost: 1},
				{Metric: "margin_mean", Outcome: Pass, Better: suites.HigherIsBetter, Golden: ptr(1.375), Candidate: ptr(1.375), Delta: ptr(0.0),
					Tolerance: "not gated"},
			},
			Changes: []ItemChange{{ID: "i0000", Index: 0, Change: Lost, GoldenChosen: ptr(0), CandidateChosen: ptr(1), GoldenMargin: ptr(1.0), CandidateMargin: ptr(1.0)}},
		}},
	}
	require.Empty(t, cmp.Diff(want, v, approx))

	// The verdict survives its JSON form.
	data, err := EncodeVerdict(v)
	require.NoError(t, err)
	back, err := DecodeVerdict("v.json", data)
	require.NoError(t, err)
	require.Empty(t, cmp.Diff(v, back))

	// Comparing again gives the same bytes.
	v2, err := Compare(s, cr, dir, Options{})
	require.NoError(t, err)
	data2, err := EncodeVerdict(v2)
	require.NoError(t, err)
	require.Equal(t, data, data2)
}

func TestCompareBounds(t *testing.T) {
	gold := bools(100, 90) // accuracy 0.9
	cases := []struct {
		name, gate string
		right      int // candidate items right (of the 100; golden has 90)
		want       Outcome
		bound      float64
	}{
		{"within abs", "accuracy: {abs: 0.02}", 89, Pass, 0.02},
		{"at abs", "accuracy: {abs: 0.03}", 88, Pass, 0.03}, // worse by 0.02 (0.9−0.88 rounds below 0.03)
		{"beyond abs", "accuracy: {abs: 0.02}", 85, Fail, 0.02},
		{"within rel", "accuracy: {abs: 0, rel: 0.05}", 86, Pass, 0.045}, // bound 0.05·0.9
		{"beyond rel", "accuracy: {abs: 0, rel: 0.05}", 85, Fail, 0.045},
		{"rel wins over a smaller abs", "accuracy: {abs: 0.01, rel: 0.05}", 86, Pass, 0.045},
		{"abs wins over a smaller rel", "accuracy: {abs: 0.06, rel: 0.05}", 85, Pass, 0.06},
		{"improved beyond the bound", "accuracy: {abs: 0.02}", 95, Improved, 0.02},
		{"better within the bound", "accuracy: {abs: 0.02}", 91, Pass, 0.02},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := parseSuite(t, choiceYAML("mc", c.gate))
			cand := bools(100, c.right)
			v := compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, choiceProbe(t, "mc", cand)), Options{})
			m := metricOf(t, v, "mc", "accuracy")
			require.Equal(t, c.want, m.Outcome, m.Note)
			require.InDelta(t, c.bound, m.Bound, 1e-15)
			require.Equal(t, c.want, v.Outcome)
			require.Equal(t, c.want != Fail, v.Passed, "improved is reported, not failed")
			switch c.want {
			case Fail:
				require.Contains(t, m.Note, "beyond the bound")
			case Improved:
				require.Contains(t, m.Note, "better by")
			}
		})
	}
}

func TestCompareLowerIsBetter(t *testing.T) {
	s := parseSuite(t, pplYAML("ppl", "perplexity: {rel: 0.02}"))
	gold := pplProbe(t, "ppl", noiseAround(10, 1, 0.1))
	for _, c := range []struct {
		name  string
		shift float64 // nats per token added to every window
		want  Outcome
	}{
		{"rise beyond rel fails", 0.03, Fail},  // perplexity ×e^0.03 ≈ +3.0%
		{"rise within rel passes", 0.01, Pass}, // ≈ +1.0%
		{"fall beyond rel improves", -0.03, Improved},
		{"fall within rel passes", -0.01, Pass},
	} {
		t.Run(c.name, func(t *testing.T) {
			cand := pplProbe(t, "ppl", shifted(noiseAround(10, 1, 0.1), c.shift))
			v := compareOne(t, s, newResults(s, gold), newResults(s, cand), Options{})
			m := metricOf(t, v, "ppl", "perplexity")
			require.Equal(t, suites.LowerIsBetter, m.Better)
			require.Equal(t, c.want, m.Outcome, m.Note)
			require.InDelta(t, 0.02*gold.Metric("perplexity").Value, m.Bound, 1e-12)
			require.Equal(t, c.shift > 0, *m.Delta > 0)
		})
	}
}

func TestCompareFlipCaps(t *testing.T) {
	gold := bools(100, 50)
	// Three items lost and three gained: accuracy does not move.
	cand := flip(gold, 0, 1, 2, 97, 98, 99)
	for _, c := range []struct {
		gate string
		want Outcome
	}{
		{"accuracy: {abs: 0.5, max_flips: 2}", Fail},
		{"accuracy: {abs: 0.5, max_flips: 3}", Pass},
		{"accuracy: {abs: 0.5, max_flip_fraction: 0.02}", Fail}, // 3/100 > 0.02
		{"accuracy: {abs: 0.5, max_flip_fraction: 0.03}", Pass},
	} {
		t.Run(c.gate, func(t *testing.T) {
			s := parseSuite(t, choiceYAML("mc", c.gate))
			v := compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, choiceProbe(t, "mc", cand)), Options{})
			m := metricOf(t, v, "mc", "accuracy")
			require.Equal(t, 0.0, *m.Delta, "the accuracy is unchanged")
			require.Equal(t, 3, m.Lost)
			require.Equal(t, 3, m.Gained)
			require.Equal(t, c.want, m.Outcome, m.Note)
			if c.want == Fail {
				require.Contains(t, m.Note, "3 ")
				require.Contains(t, m.Note, "items lost, more than the cap")
			}
		})
	}
}

func TestCompareFailIfWithMcNemar(t *testing.T) {
	gold := bools(200, 150) // items 0..149 right
	// sig: 20 lost, 2 gained, exact p = 2·(1+22+231)/2^22 ≈ 1.2e-4 (by hand),
	// accuracy down 0.09. noise: 3 lost, 1 gained, p = 2·5/16 = 0.625,
	// accuracy down 0.01. better: 2 lost, 20 gained (significant, but an
	// improvement, so never a failure).
	sig := flip(gold, 0, 1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16, 17, 18, 19, 150, 151)
	noise := flip(gold, 0, 1, 2, 150)
	better := flip(gold, 0, 1, 150, 151, 152, 153, 154, 155, 156, 157, 158, 159, 160, 161, 162, 163, 164, 165, 166, 167, 168, 169)
	cases := []struct {
		name   string
		cand   []bool
		abs    string
		failIf string
		want   Outcome
	}{
		{"significant, small: significant", sig, "0.5", "significant", Fail},
		{"significant, small: both", sig, "0.5", "both", Pass},
		{"significant, small: either", sig, "0.5", "either", Fail},
		{"significant, small: large", sig, "0.5", "large", Pass},
		{"significant, large: both", sig, "0.005", "both", Fail},
		{"noise, large: significant", noise, "0.005", "significant", Pass},
		{"noise, large: both", noise, "0.005", "both", Pass},
		{"noise, large: either", noise, "0.005", "either", Fail},
		{"noise, large: large", noise, "0.005", "large", Fail},
		{"noise, small: either", noise, "0.5", "either", Pass},
		{"improvement: significant", better, "0.5", "significant", Pass},
		{"improvement: either", better, "0.5", "either", Pass},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: "+c.abs+", test: mcnemar, fail_if: "+c.failIf+"}"))
			v := compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, choiceProbe(t, "mc", c.cand)), Options{})
			m := metricOf(t, v, "mc", "accuracy")
			require.Equal(t, c.want, m.Outcome, m.Note)
			require.Equal(t, "mcnemar-exact", m.Test)
			require.Equal(t, stats.McNemarTest(m.Lost, m.Gained).ExactP, *m.P)
			require.Equal(t, stats.McNemarTest(m.Lost, m.Gained).Statistic, *m.Statistic)
			switch {
			case slices.Equal(c.cand, sig):
				require.Equal(t, [2]int{20, 2}, [2]int{m.Lost, m.Gained})
				require.InDelta(t, 508.0/(1<<22), *m.P, 1e-15)
			case slices.Equal(c.cand, noise):
				require.InDelta(t, 0.625, *m.P, 1e-15)
			}
			if c.want == Pass && c.failIf != "either" && (slices.Equal(c.cand, sig) || c.abs == "0.005") {
				require.Contains(t, m.Note, "not failed: the suite fails this metric only if "+c.failIf)
			}
		})
	}
}

func TestComparePairedBootstrap(t *testing.T) {
	gate := "perplexity: {rel: 1, test: bootstrap, fail_if: significant}\n      mean_nll: {abs: 1, test: bootstrap, fail_if: significant}"
	s := parseSuite(t, pplYAML("ppl", gate))
	base := noiseAround(40, 2, 0.5)
	gold := pplProbe(t, "ppl", base)

	// A clear regression: every window 0.05 nats per token worse. Every
	// resample then moves by the same amount, so the interval excludes 0.
	reg := pplProbe(t, "ppl", shifted(base, 0.05))
	v := compareOne(t, s, newResults(s, gold), newResults(s, reg), Options{})
	for _, name := range []string{"perplexity", "mean_nll"} {
		m := metricOf(t, v, "ppl", name)
		require.Equal(t, "paired-bootstrap", m.Test)
		require.Equal(t, Fail, m.Outcome, "%s: %s", name, m.Note)
		require.Greater(t, *m.CILo, 0.0, name)
		require.Less(t, *m.P, 0.05, name)
		require.Contains(t, m.Note, "significant (p=")
	}
	nll := metricOf(t, v, "ppl", "mean_nll")
	require.InDelta(t, 0.05, *nll.Statistic, 1e-12, "the estimate is candidate − golden on the metric's scale")
	require.InDelta(t, 0.05, *nll.CILo, 1e-12)
	require.InDelta(t, 0.05, *nll.CIHi, 1e-12)
	ppl := metricOf(t, v, "ppl", "perplexity")
	require.InDelta(t, reg.Metric("perplexity").Value-gold.Metric("perplexity").Value, *ppl.Statistic, 1e-12,
		"the perplexity interval is of exp(candidate) − exp(golden), in perplexity units")

	// Noise: window differences ±, summing to zero. The interval straddles 0.
	noisy := pplProbe(t, "ppl", func() []float64 {
		d := noiseAround(40, 0, 0.05)
		out := make([]float64, 40)
		for i := range out {
			out[i] = base[i] + d[i]
		}
		return out
	}())
	v2 := compareOne(t, s, newResults(s, gold), newResults(s, noisy), Options{})
	for _, name := range []string{"perplexity", "mean_nll"} {
		m := metricOf(t, v2, "ppl", name)
		require.Equal(t, Pass, m.Outcome, "%s: %s", name, m.Note)
		require.Less(t, *m.CILo, 0.0, name)
		require.Greater(t, *m.CIHi, 0.0, name)
		require.Greater(t, *m.P, 0.05, name)
	}

	// The interval is the stats package's paired bootstrap of the windows
	// with the fixed seed, the suite's resample count and level 1 − α.
	var ga, gd, ca, cd []float64
	for i := range gold.Items {
		ga, gd = append(ga, *gold.Items[i].NLL), append(gd, float64(*gold.Items[i].Tokens))
		ca, cd = append(ca, *noisy.Items[i].NLL), append(cd, float64(*noisy.Items[i].Tokens))
	}
	iv, err := stats.PairedBootstrap(40, 2000, BootstrapSeed, 0.95, stats.RatioDiff(ga, gd, ca, cd))
	require.NoError(t, err)
	nm := metricOf(t, v2, "ppl", "mean_nll")
	require.Equal(t, []float64{iv.Lo, iv.Hi, iv.P, iv.Estimate}, []float64{*nm.CILo, *nm.CIHi, *nm.P, *nm.Statistic})

	// The fixed seed makes the interval reproducible, bit for bit.
	v3 := compareOne(t, s, newResults(s, gold), newResults(s, noisy), Options{})
	require.Empty(t, cmp.Diff(v2.Probes, v3.Probes))

	// No shared window ids: no interval, and the note says why.
	other := pplProbe(t, "ppl", base)
	for i := range other.Items {
		other.Items[i].ID = "x" + other.Items[i].ID
	}
	v4 := compareOne(t, s, newResults(s, gold), newResults(s, other), Options{})
	m := metricOf(t, v4, "ppl", "mean_nll")
	require.Nil(t, m.CILo)
	require.Contains(t, m.Note, "no paired windows")
}

func TestComparePowerWarning(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02, test: mcnemar}"))
	// With no discordant items the warning uses psi = the bound (0.02). By
	// Connor's formula the pairs needed to detect delta = psi = 0.02 at
	// α = 0.05 and power 0.8 are n0 = PairedSampleSize(0.02, 0.02, …): with
	// n0 items the smallest detectable change is within the tolerance, with
	// n0 − 1 even a change the size of psi is not detectable.
	n0, err := stats.PairedSampleSize(0.02, 0.02, 0.05, 0.8)
	require.NoError(t, err)
	require.Greater(t, n0, 100, "a 0.02 tolerance needs hundreds of items")
	for _, c := range []struct {
		n    int
		warn bool
	}{{20, true}, {n0 - 1, true}, {n0, false}, {2000, false}} {
		gold := bools(c.n, c.n/2)
		v := compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, choiceProbe(t, "mc", gold)), Options{})
		m := metricOf(t, v, "mc", "accuracy")
		require.Equal(t, Pass, m.Outcome, "a power warning never fails the gate")
		if c.warn {
			require.Contains(t, m.PowerWarning, "paired items", "n=%d", c.n)
			require.Contains(t, m.PowerWarning, "add items or widen the tolerance")
		} else {
			require.Empty(t, m.PowerWarning, "n=%d", c.n)
		}
	}

	// A power below 0.5 cannot be checked with Connor's formula; the verdict
	// says so instead of failing.
	low := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02, test: mcnemar, power: 0.3}"))
	gold := bools(20, 10)
	v := compareOne(t, low, newResults(low, choiceProbe(t, "mc", gold)), newResults(low, choiceProbe(t, "mc", gold)), Options{})
	require.Contains(t, metricOf(t, v, "mc", "accuracy").PowerWarning, "below 0.5")
}

func TestCompareValueOutcomes(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}"))
	gold := bools(10, 5)

	// A NaN candidate value is an error, whatever the tolerance.
	cp := choiceProbe(t, "mc", gold)
	cp.Metric("accuracy").Value = nan
	v := compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, cp), Options{AllowNew: true})
	require.Equal(t, Error, metricOf(t, v, "mc", "accuracy").Outcome)
	require.Equal(t, Error, probeOf(t, v, "mc").Outcome)
	require.False(t, v.Passed)

	// A gated metric the run did not produce is missing.
	cp = choiceProbe(t, "mc", gold)
	cp.Metrics = slices.DeleteFunc(cp.Metrics, func(m results.Metric) bool { return m.Name == "accuracy" })
	v = compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, cp), Options{})
	require.Equal(t, Missing, metricOf(t, v, "mc", "accuracy").Outcome)
	require.Equal(t, Missing, v.Outcome)
	require.False(t, v.Passed)
	v = compareOne(t, s, newResults(s, choiceProbe(t, "mc", gold)), newResults(s, cp), Options{AllowNew: true})
	require.True(t, v.Passed, "missing passes with AllowNew")

	// A golden file without the metric: new.
	gp := choiceProbe(t, "mc", gold)
	gp.Metrics = slices.DeleteFunc(gp.Metrics, func(m results.Metric) bool { return m.Name == "accuracy" })
	v = compareOne(t, s, newResults(s, gp), newResults(s, choiceProbe(t, "mc", gold)), Options{})
	require.Equal(t, New, metricOf(t, v, "mc", "accuracy").Outcome)
}

func TestCompareProbeOutcomes(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}"))
	gold := bools(10, 5)
	dir := filepath.Join(t.TempDir(), "golden")

	// No golden file: new, failing unless AllowNew.
	v, err := Compare(s, newResults(s, choiceProbe(t, "mc", gold)), dir, Options{})
	require.NoError(t, err)
	require.Equal(t, New, probeOf(t, v, "mc").Outcome)
	require.Equal(t, New, metricOf(t, v, "mc", "accuracy").Outcome)
	require.Contains(t, probeOf(t, v, "mc").Note, "no golden file yet")
	require.Nil(t, v.GoldenFingerprint)
	require.False(t, v.Passed)
	v, err = Compare(s, newResults(s, choiceProbe(t, "mc", gold)), dir, Options{AllowNew: true})
	require.NoError(t, err)
	require.True(t, v.Passed)
	require.Equal(t, New, v.Outcome)

	// A golden file of a probe the suite does not have: missing.
	record(t, dir, newResults(s, choiceProbe(t, "mc", gold)))
	old := choiceProbe(t, "dropped", gold)
	data, err := FromResults(newResults(s), old).Encode()
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(Path(dir, "dropped"), data, 0o644))
	v, err = Compare(s, newResults(s, choiceProbe(t, "mc", gold)), dir, Options{})
	require.NoError(t, err)
	require.Equal(t, Pass, probeOf(t, v, "mc").Outcome)
	require.Equal(t, Missing, probeOf(t, v, "dropped").Outcome)
	require.Contains(t, probeOf(t, v, "dropped").Note, "the suite has no such probe")
	require.Equal(t, Missing, v.Outcome)
	require.False(t, v.Passed)
	require.NoError(t, os.Remove(Path(dir, "dropped")))

	// A probe that could not run is an error; a skipped one is skipped.
	failed := &results.Probe{Name: "mc", Kind: suites.Choice, Status: results.Failed, Note: "out of memory"}
	v, err = Compare(s, newResults(s, failed), dir, Options{AllowNew: true})
	require.NoError(t, err)
	require.Equal(t, Error, probeOf(t, v, "mc").Outcome)
	require.Contains(t, probeOf(t, v, "mc").Note, "out of memory")
	require.False(t, v.Passed)
	skipped := &results.Probe{Name: "mc", Kind: suites.Choice, Status: results.Skipped, Note: "needs a sparse candidate build"}
	v, err = Compare(s, newResults(s, skipped), dir, Options{})
	require.NoError(t, err)
	require.Equal(t, Skipped, probeOf(t, v, "mc").Outcome)
	require.Equal(t, Skipped, v.Outcome)
	require.True(t, v.Passed, "a skipped probe does not fail the gate")

	// A probe whose definition changed since the golden file: a note.
	r := newResults(s, choiceProbe(t, "mc", gold))
	r.Probes[0].Hash = "0123"
	v, err = Compare(s, r, dir, Options{})
	require.NoError(t, err)
	require.Contains(t, probeOf(t, v, "mc").Note, "definition or data changed")
}

func TestVerdictPassedFollowsFailing(t *testing.T) {
	for _, o := range []Outcome{Pass, Improved, Skipped, New, Missing, Fail, Error} {
		for _, allow := range []bool{false, true} {
			want := o == Fail || o == Error || (!allow && (o == New || o == Missing))
			require.Equal(t, want, o.Failing(allow), "%s allowNew=%v", o, allow)
		}
	}
	// Worse orders the outcomes pass < improved < skipped < new < missing < fail < error.
	order := []Outcome{Pass, Improved, Skipped, New, Missing, Fail, Error}
	for i, a := range order {
		for j, b := range order {
			require.Equal(t, order[max(i, j)], Worse(a, b))
		}
	}
	// Across probes: a failing probe fails the verdict however good the rest.
	s := parseSuite(t, choiceYAML("a", "accuracy: {abs: 0.02}")+choiceYAML("b", "accuracy: {abs: 0.02}"))
	gold := bools(100, 50)
	gr := newResults(s, choiceProbe(t, "a", gold), choiceProbe(t, "b", gold))
	cr := newResults(s, choiceProbe(t, "a", bools(100, 80)), choiceProbe(t, "b", bools(100, 40)))
	v := compareOne(t, s, gr, cr, Options{AllowNew: true})
	require.Equal(t, Improved, probeOf(t, v, "a").Outcome)
	require.Equal(t, Fail, probeOf(t, v, "b").Outcome)
	require.Equal(t, Fail, v.Outcome)
	require.False(t, v.Passed)
	require.Equal(t, []string{"a", "b"}, []string{v.Probes[0].Name, v.Probes[1].Name}, "probes in suite order")
}

func TestCompareRefuses(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}"))
	gold := bools(10, 5)
	dir := filepath.Join(t.TempDir(), "golden")
	record(t, dir, newResults(s, choiceProbe(t, "mc", gold)))

	// Results of another version of the suite.
	r := newResults(s, choiceProbe(t, "mc", gold))
	r.Suite.Hash = "feed"
	_, err := Compare(s, r, dir, Options{})
	require.ErrorContains(t, err, "re-run the suite")

	// Results without one of the suite's probes.
	two := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}")+choiceYAML("other", "accuracy: {abs: 0.02}"))
	_, err = Compare(two, newResults(two, choiceProbe(t, "mc", gold)), dir, Options{})
	require.ErrorContains(t, err, `the results have no probe "other"`)

	// A golden directory that is a symbolic link.
	link := filepath.Join(t.TempDir(), "link")
	if err := os.Symlink(dir, link); err != nil {
		t.Skipf("no symbolic links here: %v", err)
	}
	_, err = Compare(s, newResults(s, choiceProbe(t, "mc", gold)), link, Options{})
	require.ErrorContains(t, err, "is a symbolic link")

	// A golden directory that is a file.
	_, err = Compare(s, newResults(s, choiceProbe(t, "mc", gold)), Path(dir, "mc"), Options{})
	require.ErrorContains(t, err, "is not a directory")

	// A golden file of another kind than the suite's probe.
	ppl := parseSuite(t, pplYAML("mc", "perplexity:"))
	_, err = Compare(ppl, newResults(ppl, pplProbe(t, "mc", []float64{1})), dir, Options{})
	require.ErrorContains(t, err, "the golden file is for a choice probe")

	// A damaged golden file is an error naming it.
	require.NoError(t, os.WriteFile(Path(dir, "mc"), []byte("sparsegate-golden 1\nprobe \"mc\"\n"), 0o644))
	_, err = Compare(s, newResults(s, choiceProbe(t, "mc", gold)), dir, Options{})
	require.ErrorContains(t, err, Path(dir, "mc")+":3: ")
}

func TestCompareChanges(t *testing.T) {
	s := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 1}"))
	gp := choiceProbe(t, "mc", []bool{true, false, false, true, true, true})
	cp := choiceProbe(t, "mc", []bool{false, true, false, true, true, true})
	cp.Items[2].Chosen = ptr(2)                       // wrong both times, another option
	cp.Items[3].Margin = ptr(*cp.Items[3].Margin + 2) // same choice, margin moved 2 nats
	cp.Items[5].Margin = ptr(*cp.Items[5].Margin + 0.5)
	cp.Items = append(cp.Items[:4], cp.Items[5:]...) // item 4 dropped
	cp.Items = append(cp.Items, results.Item{ID: "new", Index: 6, Chosen: ptr(0), Correct: ptr(true)})
	require.NoError(t, runner.Recompute(cp))
	v := compareOne(t, s, newResults(s, gp), newResults(s, cp), Options{})
	var got [][2]string
	for _, c := range probeOf(t, v, "mc").Changes {
		got = append(got, [2]string{c.ID, c.Change})
	}
	require.Equal(t, [][2]string{{"i0000", Lost}, {"i0001", Gained}, {"i0002", Changed}, {"i0003", Moved}, {"i0004", Dropped}, {"new", Added}}, got,
		"in item order; a 0.5 nat margin move is below the 1 nat default")

	// A lower MarginMove lists the smaller move too.
	v = compareOne(t, s, newResults(s, gp), newResults(s, cp), Options{MarginMove: 0.25})
	require.Len(t, probeOf(t, v, "mc").Changes, 7)

	// Perplexity windows whose mean NLL moved at least NLLMove.
	ps := parseSuite(t, pplYAML("ppl", "perplexity: {rel: 1}"))
	g := pplProbe(t, "ppl", []float64{1, 1, 1})
	c := pplProbe(t, "ppl", []float64{1, 1.2, 1.01})
	v = compareOne(t, ps, newResults(ps, g), newResults(ps, c), Options{})
	ch := probeOf(t, v, "ppl").Changes
	require.Len(t, ch, 1)
	require.Equal(t, "w0001", ch[0].ID)
	require.InDelta(t, 1.0, *ch[0].GoldenNLL, 1e-12)
	require.InDelta(t, 1.2, *ch[0].CandidateNLL, 1e-12)
	require.True(t, math.Abs(*ch[0].CandidateNLL-*ch[0].GoldenNLL) >= 0.05)
}

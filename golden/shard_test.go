package golden

import (
	"fmt"
	"math"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

const shardSuite = `  - name: mc
    kind: choice
    items: data/items.jsonl
    gate:
      accuracy: {abs: 0}
  - name: ppl
    kind: perplexity
    text: data/text.txt
    window: 32
    gate:
      mean_nll: {abs: 0}
  - name: flips
    kind: flips
    of: [mc]
    gate:
      lost: {abs: 0}
`

// unshardedRun is a run of shardSuite: 60 choice items (right in a pattern,
// with base outcomes), 30 perplexity windows and their flips.
func unshardedRun(t *testing.T, s *suites.Suite) *results.Results {
	t.Helper()
	right := make([]bool, 60)
	for i := range right {
		right[i] = i%3 != 0 || i%7 == 0
	}
	mc := choiceProbe(t, "mc", right)
	flips := &results.Probe{Name: "flips", Kind: suites.Flips}
	for i := range mc.Items {
		it := &mc.Items[i]
		it.BaseCorrect = ptr(i%5 != 0)
		flips.Items = append(flips.Items, results.Item{ID: "mc/" + it.ID, Index: it.Index, Correct: ptr(*it.Correct), BaseCorrect: ptr(*it.BaseCorrect)})
	}
	require.NoError(t, runner.Recompute(flips))
	perTok := make([]float64, 30)
	for i := range perTok {
		perTok[i] = 1.5 + float64(i%6)/10
	}
	return newResults(s, mc, pplProbe(t, "ppl", perTok), flips)
}

// shardOf returns shard k of n of r, as the runner would have produced it:
// only the shard's items, metrics recomputed from them.
func shardOf(t *testing.T, r *results.Results, k, n int) *results.Results {
	t.Helper()
	out := *r
	out.Shard = results.Shard{Index: k, Count: n}
	out.Probes = nil
	for _, p := range r.Probes {
		q := *p
		q.Items = nil
		for _, it := range p.Items {
			src, id := p.Name, it.ID
			if p.Kind == suites.Flips {
				src, id = "mc", it.ID[len("mc/"):]
			}
			if runner.ShardOf(src, id, n) == k {
				q.Items = append(q.Items, it)
			}
		}
		require.NoError(t, runner.Recompute(&q))
		out.Probes = append(out.Probes, &q)
	}
	return &out
}

func TestCompareSharded(t *testing.T) {
	s := parseSuite(t, shardSuite)
	full := unshardedRun(t, s)
	dir := filepath.Join(t.TempDir(), "golden")
	record(t, dir, full)
	fullAcc := full.Probe("mc").Metric("accuracy").Value

	differs := false
	for n := 2; n <= 4; n++ {
		total := 0
		for k := 1; k <= n; k++ {
			t.Run(fmt.Sprintf("%d/%d", k, n), func(t *testing.T) {
				sh := shardOf(t, full, k, n)
				v, err := Compare(s, sh, dir, Options{})
				require.NoError(t, err)
				require.Equal(t, results.Shard{Index: k, Count: n}, v.Shard)
				require.True(t, v.Passed, "a shard of the golden run itself passes with zero tolerances")

				// By hand: the golden accuracy of this shard is the share of
				// right items among the golden items this shard owns.
				right, items := 0, 0
				nll, tok := 0.0, 0
				lost := 0
				for _, it := range full.Probe("mc").Items {
					if runner.ShardOf("mc", it.ID, n) != k {
						continue
					}
					items++
					if *it.Correct {
						right++
					}
					if *it.BaseCorrect && !*it.Correct {
						lost++
					}
				}
				for _, it := range full.Probe("ppl").Items {
					if runner.ShardOf("ppl", it.ID, n) == k {
						nll += *it.NLL
						tok += *it.Tokens
					}
				}
				total += items
				acc := metricOf(t, v, "mc", "accuracy")
				require.Equal(t, float64(right)/float64(items), *acc.Golden)
				require.Equal(t, *acc.Golden, *acc.Candidate)
				require.Equal(t, items, probeOf(t, v, "mc").Items)
				if *acc.Golden != fullAcc {
					differs = true
				}
				require.InDelta(t, nll/float64(tok), *metricOf(t, v, "ppl", "mean_nll").Golden, 1e-15)
				require.Equal(t, float64(lost), *metricOf(t, v, "flips", "lost").Golden)

				// One item of this shard regresses: the shard sees exactly one loss.
				c := shardOf(t, full, k, n)
				mc := c.Probe("mc")
				for i := range mc.Items {
					if *mc.Items[i].Correct {
						mc.Items[i].Correct = ptr(false)
						break
					}
				}
				require.NoError(t, runner.Recompute(mc))
				v, err = Compare(s, c, dir, Options{})
				require.NoError(t, err)
				acc = metricOf(t, v, "mc", "accuracy")
				require.Equal(t, 1, acc.Lost)
				require.Equal(t, Fail, acc.Outcome)
				require.InDelta(t, -1/float64(items), *acc.Delta, 1e-15)
			})
		}
		require.Equal(t, 60, total, "the shards of %d cover every item once", n)
	}
	require.True(t, differs, "some shard's golden accuracy differs from the unsharded one, so the restriction is visible")

	// The unsharded golden value, compared against the unsharded run, is the
	// file's own.
	v, err := Compare(s, full, dir, Options{})
	require.NoError(t, err)
	require.Equal(t, fullAcc, *metricOf(t, v, "mc", "accuracy").Golden)
	require.False(t, math.IsNaN(fullAcc))
}

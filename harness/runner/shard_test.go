package runner

import (
	"bytes"
	"testing"

	"github.com/google/go-cmp/cmp"
	"github.com/google/go-cmp/cmp/cmpopts"
	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
)

func TestShardOfIsStable(t *testing.T) {
	// The assignment is a pure function of (probe, id, n): FNV-1a 64 of
	// "probe\x00id" modulo n, plus one.
	for n := 1; n <= 8; n++ {
		for _, id := range []string{"", "a", "w0001", "it-3"} {
			s := ShardOf("mc", id, n)
			require.GreaterOrEqual(t, s, 1)
			require.LessOrEqual(t, s, n)
			require.Equal(t, s, ShardOf("mc", id, n))
		}
	}
	require.Equal(t, 1, ShardOf("p", "x", 1))
	// FNV-1a 64 written out: offset basis 14695981039346656037, prime
	// 1099511628211 (the published FNV-1a definition; constants
	// from memory, and hash/fnv agrees with them).
	fnv1a := func(b []byte) uint64 {
		h := uint64(14695981039346656037)
		for _, c := range b {
			h ^= uint64(c)
			h *= 1099511628211
		}
		return h
	}
	for _, n := range []int{2, 3, 7, 8} {
		require.Equal(t, int(fnv1a([]byte("mc\x00it-3"))%uint64(n))+1, ShardOf("mc", "it-3", n), n)
	}
	// The probe name is part of the key, separated from the id: "ab"+"c" and
	// "a"+"bc" are different units. (Checked over several n so that a
	// collision of one modulus cannot hide a missing separator.)
	differ := false
	for n := 2; n <= 64; n++ {
		differ = differ || ShardOf("ab", "c", n) != ShardOf("a", "bc", n)
	}
	require.True(t, differ)
}

// ignoreTimes drops what legitimately differs between runs: wall times.
var ignoreTimes = cmpopts.IgnoreFields(results.Probe{}, "Seconds")

func TestShardsCoverEveryItemOnceAndMerge(t *testing.T) {
	s := writeSuite(t, mixedSuite, defaultFiles())
	base := openTarget(t, writeModel(t, 1, nil), 2)
	cand := sparseTarget(t, base, 8)
	whole := run(t, s, base, cand, Options{})
	for _, p := range whole.Probes {
		require.Equal(t, results.Ran, p.Status, "%s: %s", p.Name, p.Note)
		require.NotEmpty(t, p.Items, p.Name)
		require.NotEmpty(t, p.Metrics, p.Name)
	}
	for n := 1; n <= 8; n++ {
		var parts []*results.Results
		seen := map[string]map[string]int{}
		for i := 1; i <= n; i++ {
			r := run(t, s, base, cand, Options{Shard: results.Shard{Index: i, Count: n}})
			require.Equal(t, results.Shard{Index: i, Count: n}, r.Shard)
			for _, p := range r.Probes {
				if seen[p.Name] == nil {
					seen[p.Name] = map[string]int{}
				}
				for _, it := range p.Items {
					seen[p.Name][it.ID]++
					if p.Kind != "flips" { // flips items follow their source probe's shard
						require.Equal(t, i, ShardOf(p.Name, it.ID, n), "%s/%s ran in shard %d of %d", p.Name, it.ID, i, n)
					}
				}
			}
			parts = append(parts, r)
		}
		for _, p := range whole.Probes {
			if p.Kind == "flips" {
				continue // flips items are the other probes' items, checked through them
			}
			require.Len(t, seen[p.Name], len(p.Items), "n=%d probe %s: the shards' items are the unsharded items", n, p.Name)
			for _, it := range p.Items {
				require.Equal(t, 1, seen[p.Name][it.ID], "n=%d: %s/%s", n, p.Name, it.ID)
			}
		}
		// Merge in a scrambled order: the result must not depend on it.
		for i, j := 0, len(parts)-1; i < j; i, j = i+1, j-1 {
			parts[i], parts[j] = parts[j], parts[i]
		}
		merged, err := Merge(parts)
		require.NoError(t, err)
		if d := cmp.Diff(whole, merged, ignoreTimes); d != "" {
			t.Fatalf("n=%d: merged shards differ from the unsharded run (-whole +merged):\n%s", n, d)
		}
	}
}

func TestMergeRefusesIncompleteOrMixedShards(t *testing.T) {
	s := writeSuite(t, mixedSuite, defaultFiles())
	base := openTarget(t, writeModel(t, 1, nil), 2)
	a := run(t, s, base, nil, Options{Shard: results.Shard{Index: 1, Count: 2}, Probes: []string{"ppl"}})
	b := run(t, s, base, nil, Options{Shard: results.Shard{Index: 2, Count: 2}, Probes: []string{"ppl"}})
	_, err := Merge([]*results.Results{a})
	require.ErrorIs(t, err, ErrInput)
	require.ErrorContains(t, err, "1 of 2 shards given")
	_, err = Merge([]*results.Results{a, a})
	require.ErrorContains(t, err, "shard 1/2 is given twice")
	_, err = Merge(nil)
	require.ErrorIs(t, err, ErrInput)
	other := *b
	other.Suite.Hash = "different"
	_, err = Merge([]*results.Results{a, &other})
	require.ErrorContains(t, err, "different suite")
	m, err := Merge([]*results.Results{b, a})
	require.NoError(t, err)
	require.Equal(t, results.Skipped, m.Probe("mc").Status)
	require.Equal(t, "not selected", m.Probe("mc").Note)
}

func TestDeterministicAcrossThreadsAndRuns(t *testing.T) {
	s := writeSuite(t, mixedSuite, defaultFiles())
	dir := writeModel(t, 4, nil)
	var outs [][]byte
	for _, threads := range []int{1, 2, 3, 1} {
		base := openTarget(t, dir, threads)
		cand := sparseTarget(t, base, 8)
		r := run(t, s, base, cand, Options{})
		var buf bytes.Buffer
		require.NoError(t, r.Encode(&buf))
		outs = append(outs, buf.Bytes())
	}
	require.Contains(t, string(outs[0]), `"seconds": 0,`)
	for i := 1; i < len(outs); i++ {
		require.True(t, bytes.Equal(outs[0], outs[i]), "run %d's Results JSON differs from run 0's", i)
	}
}

package main

import (
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

// A run on the dense base alone prints a summary line per probe, and its
// Results JSON does not depend on the thread count (wall times aside).
func TestRunBaseOnlySummaryAndThreads(t *testing.T) {
	suite := writeSuite(t, smallSuite)
	tmp := t.TempDir()
	var saved []string
	for _, threads := range []string{"1", "2"} {
		res := filepath.Join(tmp, "r"+threads+".json")
		code, out, errs := sparsegate(t, "run", "--suite", suite, "--base", demoModelSrc, "--no-cache", "--threads", threads, "--results", res)
		require.Equal(t, 0, code, errs)
		require.Contains(t, out, "suite cmdtest ("+suite+"), base "+demoModelSrc+", shard 1/1")
		require.Regexp(t, `(?m)^ppl\s+perplexity\s+ran\s+\d+\s+bits_per_byte=\S+\s+mean_nll=\S+\s+perplexity=\S+$`, out)
		require.Regexp(t, `(?m)^status-mc\s+choice\s+ran\s+12\s+accuracy=\S+\s+margin_mean=\S+$`, out)
		saved = append(saved, zeroSeconds(t, readFile(t, res)))
	}
	require.Equal(t, saved[0], saved[1], "Results differ between --threads 1 and --threads 2")
	require.Contains(t, saved[0], `"perplexity"`)
}

// A temporary cache gives the same results as no cache, on the first run
// (written) and the second (read).
func TestRunCacheGivesSameResults(t *testing.T) {
	suite := writeSuite(t, smallSuite)
	tmp := t.TempDir()
	cache := filepath.Join(tmp, "cache")
	var saved []string
	for i, extra := range [][]string{{"--no-cache"}, {"--cache", cache}, {"--cache", cache}} {
		res := filepath.Join(tmp, "r"+string(rune('0'+i))+".json")
		args := append([]string{"run", "--suite", suite, "--base", demoModelSrc, "--threads", "2", "--results", res, "--probe", "status-mc"}, extra...)
		code, _, errs := sparsegate(t, args...)
		require.Equal(t, 0, code, errs)
		saved = append(saved, zeroSeconds(t, readFile(t, res)))
	}
	require.Equal(t, saved[0], saved[1])
	require.Equal(t, saved[0], saved[2])
	matches, err := filepath.Glob(filepath.Join(cache, "*", "*.json"))
	require.NoError(t, err)
	require.NotEmpty(t, matches, "the cache directory holds no entries")
}

func TestRunBadUsage(t *testing.T) {
	suite := writeSuite(t, smallSuite)
	for _, c := range []struct {
		name string
		args []string
		want string
	}{
		{"reports without golden", []string{"--junit", "j.xml"}, "need --golden DIR"},
		{"negative threads", []string{"--threads", "-1"}, "--threads must not be negative"},
		{"bad shard", []string{"--shard", "5/4"}, `--shard "5/4"`},
		{"unknown probe", []string{"--probe", "nope"}, `no probe named "nope"`},
		{"stray argument", []string{"extra"}, "unexpected arguments"},
	} {
		t.Run(c.name, func(t *testing.T) {
			args := append([]string{"run", "--suite", suite, "--base", demoModelSrc, "--no-cache"}, c.args...)
			code, out, errs := sparsegate(t, args...)
			require.Equal(t, 2, code, out+errs)
			require.Contains(t, errs, c.want)
			require.NotContains(t, errs, "internal fault")
		})
	}
}

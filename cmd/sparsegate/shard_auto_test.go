package main

import (
	"bytes"
	"errors"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
)

// shardVars are every variable --shard auto reads; a test clears them all so
// the CI machine's own environment cannot leak in.
var shardVars = []string{
	"SPARSEGATE_SHARD_INDEX", "SPARSEGATE_SHARD_COUNT", "JOB_COMPLETION_INDEX",
	"CI_NODE_INDEX", "CI_NODE_TOTAL", "CIRCLE_NODE_INDEX", "CIRCLE_NODE_TOTAL",
	"BUILDKITE_PARALLEL_JOB", "BUILDKITE_PARALLEL_JOB_COUNT",
}

// The conventions: which variables carry the index and count, and whether
// the index counts from 0. The CI systems' conventions are from memory
// (GitLab's CI_NODE_INDEX is 1-based; CircleCI's and Buildkite's indexes
// and the Kubernetes Indexed Job's JOB_COMPLETION_INDEX are 0-based).
func TestAutoShardConventions(t *testing.T) {
	cases := []struct {
		name  string
		env   map[string]string
		count int // --shard-count
		want  results.Shard
		err   []string // substrings of the error; empty: no error
	}{
		{"ours, 1-based", map[string]string{"SPARSEGATE_SHARD_INDEX": "2", "SPARSEGATE_SHARD_COUNT": "4"}, 0, results.Shard{Index: 2, Count: 4}, nil},
		{"ours, first", map[string]string{"SPARSEGATE_SHARD_INDEX": "1", "SPARSEGATE_SHARD_COUNT": "1"}, 0, results.Shard{Index: 1, Count: 1}, nil},
		{"ours, index 0 is out of range", map[string]string{"SPARSEGATE_SHARD_INDEX": "0", "SPARSEGATE_SHARD_COUNT": "4"}, 0, results.Shard{}, []string{"SPARSEGATE_SHARD_INDEX", "out of range"}},
		{"kubernetes index with --shard-count", map[string]string{"JOB_COMPLETION_INDEX": "0"}, 3, results.Shard{Index: 1, Count: 3}, nil},
		{"kubernetes last index", map[string]string{"JOB_COMPLETION_INDEX": "2"}, 3, results.Shard{Index: 3, Count: 3}, nil},
		{"kubernetes index with count from env", map[string]string{"JOB_COMPLETION_INDEX": "1", "SPARSEGATE_SHARD_COUNT": "2"}, 0, results.Shard{Index: 2, Count: 2}, nil},
		{"kubernetes index past the count", map[string]string{"JOB_COMPLETION_INDEX": "3"}, 3, results.Shard{}, []string{"JOB_COMPLETION_INDEX", "shard 4 of 3", "out of range"}},
		{"kubernetes index without a count", map[string]string{"JOB_COMPLETION_INDEX": "1"}, 0, results.Shard{}, []string{"JOB_COMPLETION_INDEX is set", "--shard-count N", "SPARSEGATE_SHARD_COUNT"}},
		{"gitlab, 1-based", map[string]string{"CI_NODE_INDEX": "3", "CI_NODE_TOTAL": "5"}, 0, results.Shard{Index: 3, Count: 5}, nil},
		{"gitlab without a total", map[string]string{"CI_NODE_INDEX": "3"}, 0, results.Shard{}, []string{"CI_NODE_TOTAL"}},
		{"circleci, 0-based", map[string]string{"CIRCLE_NODE_INDEX": "0", "CIRCLE_NODE_TOTAL": "2"}, 0, results.Shard{Index: 1, Count: 2}, nil},
		{"buildkite, 0-based", map[string]string{"BUILDKITE_PARALLEL_JOB": "4", "BUILDKITE_PARALLEL_JOB_COUNT": "5"}, 0, results.Shard{Index: 5, Count: 5}, nil},
		{"ours before kubernetes", map[string]string{"SPARSEGATE_SHARD_INDEX": "1", "SPARSEGATE_SHARD_COUNT": "2", "JOB_COMPLETION_INDEX": "1"}, 0, results.Shard{Index: 1, Count: 2}, nil},
		{"index not a number", map[string]string{"CI_NODE_INDEX": "two", "CI_NODE_TOTAL": "4"}, 0, results.Shard{}, []string{`CI_NODE_INDEX="two" is not a number`}},
		{"count not a number", map[string]string{"SPARSEGATE_SHARD_INDEX": "1", "SPARSEGATE_SHARD_COUNT": "x"}, 0, results.Shard{}, []string{`SPARSEGATE_SHARD_COUNT="x" is not a number`}},
		{"no recognised environment", map[string]string{"UNRELATED": "1"}, 0, results.Shard{}, append([]string{"no shard in the environment"}, "SPARSEGATE_SHARD_INDEX", "JOB_COMPLETION_INDEX", "CI_NODE_INDEX", "CIRCLE_NODE_INDEX", "BUILDKITE_PARALLEL_JOB")},
		{"--shard-count alone is not an index", map[string]string{}, 4, results.Shard{}, []string{"no shard in the environment"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			getenv := func(k string) string { return c.env[k] }
			got, err := autoShard("run", getenv, c.count)
			if len(c.err) == 0 {
				require.NoError(t, err)
				require.Equal(t, c.want, got)
				return
			}
			require.Error(t, err)
			var ee *exitError
			require.True(t, errors.As(err, &ee), "%v", err)
			require.Equal(t, exitBadInput, ee.code)
			for _, s := range c.err {
				require.Contains(t, err.Error(), s)
			}
		})
	}
}

// The run command reads the process environment for --shard auto: the
// shard it picked shows in the summary, and with no recognised variables it
// exits 2 naming the ones it looked for.
func TestRunShardAutoFromEnvironment(t *testing.T) {
	for _, k := range shardVars {
		t.Setenv(k, "")
	}
	suite := writeSuite(t, smallSuite)
	args := []string{"run", "--suite", suite, "--base", demoModelSrc, "--no-cache", "--probe", "status-mc", "--shard", "auto"}

	code, out, errs := sparsegate(t, args...)
	require.Equal(t, 2, code, out+errs)
	for _, v := range []string{"SPARSEGATE_SHARD_INDEX", "JOB_COMPLETION_INDEX", "CI_NODE_INDEX", "CIRCLE_NODE_INDEX", "BUILDKITE_PARALLEL_JOB"} {
		require.Contains(t, errs, v)
	}
	require.Empty(t, out)

	t.Setenv("JOB_COMPLETION_INDEX", "1")
	code, out, errs = sparsegate(t, append(args, "--shard-count", "3")...)
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "shard 2/3")

	t.Setenv("JOB_COMPLETION_INDEX", "")
	t.Setenv("SPARSEGATE_SHARD_INDEX", "3")
	t.Setenv("SPARSEGATE_SHARD_COUNT", "3")
	code, out, errs = sparsegate(t, args...)
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "shard 3/3")
}

// runFlags.getenv, when set, is what --shard auto reads instead of the
// process environment.
func TestRunFlagsGetenvInjection(t *testing.T) {
	for _, k := range shardVars {
		t.Setenv(k, "")
	}
	suite := writeSuite(t, smallSuite)
	f := runFlags{suite: suite, base: demoModelSrc, shard: "auto", noCache: true,
		getenv: func(k string) string {
			return map[string]string{"CIRCLE_NODE_INDEX": "1", "CIRCLE_NODE_TOTAL": "4"}[k]
		}}
	var out, errb bytes.Buffer
	s, err := f.open(&cli{stdout: &out, stderr: &errb}, "run")
	require.NoError(t, err)
	defer s.close()
	require.Equal(t, results.Shard{Index: 2, Count: 4}, s.opts.Shard)
}

package main

import (
	"strconv"
	"strings"

	"sparsegate/harness/results"
)

// shardEnv is one convention for telling a parallel job its slice: the
// variable holding the index, whether it counts from 0, and the variable
// holding the count (empty: from --shard-count or SPARSEGATE_SHARD_COUNT).
// The variable names are those the CI systems and Kubernetes document
// (from memory; Kubernetes Indexed Jobs set only the index).
type shardEnv struct {
	index, count string
	zeroBased    bool
}

var shardEnvs = []shardEnv{
	{"SPARSEGATE_SHARD_INDEX", "SPARSEGATE_SHARD_COUNT", false}, // ours, 1-based
	{"JOB_COMPLETION_INDEX", "", true},                          // Kubernetes Indexed Job
	{"CI_NODE_INDEX", "CI_NODE_TOTAL", false},                   // GitLab CI parallel jobs
	{"CIRCLE_NODE_INDEX", "CIRCLE_NODE_TOTAL", true},            // CircleCI parallelism
	{"BUILDKITE_PARALLEL_JOB", "BUILDKITE_PARALLEL_JOB_COUNT", true},
}

// autoShard reads the shard from the environment; count, when > 0, is the
// --shard-count flag.
func autoShard(cmd string, getenv func(string) string, count int) (results.Shard, error) {
	var looked []string
	for _, e := range shardEnvs {
		looked = append(looked, e.index)
		iv := getenv(e.index)
		if iv == "" {
			continue
		}
		i, err := strconv.Atoi(iv)
		if err != nil {
			return results.Shard{}, usageError(cmd, "--shard auto: %s=%q is not a number", e.index, iv)
		}
		n := count
		if n > 0 && e.count != "" && getenv(e.count) != "" && getenv(e.count) != strconv.Itoa(n) {
			return results.Shard{}, usageError(cmd, "--shard auto: --shard-count %d disagrees with %s=%s; drop the flag or fix the variable", n, e.count, getenv(e.count))
		}
		if n == 0 {
			src := e.count
			if src == "" {
				src = "SPARSEGATE_SHARD_COUNT"
			}
			cv := getenv(src)
			if cv == "" {
				return results.Shard{}, usageError(cmd, "--shard auto: %s is set but the shard count is not: pass --shard-count N or set %s", e.index, src)
			}
			if n, err = strconv.Atoi(cv); err != nil {
				return results.Shard{}, usageError(cmd, "--shard auto: %s=%q is not a number", src, cv)
			}
		}
		if e.zeroBased {
			i++
		}
		if n < 1 || i < 1 || i > n {
			return results.Shard{}, usageError(cmd, "--shard auto: %s gives shard %d of %d, out of range", e.index, i, n)
		}
		return results.Shard{Index: i, Count: n}, nil
	}
	return results.Shard{}, usageError(cmd, "--shard auto: no shard in the environment; looked for %s", strings.Join(looked, ", "))
}

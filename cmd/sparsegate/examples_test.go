package main

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
	"go.yaml.in/yaml/v3"
)

const examplesDir = "../../.ci/examples"

// yamlDocs decodes every document of a YAML file.
func yamlDocs(t *testing.T, path string) []map[string]any {
	t.Helper()
	dec := yaml.NewDecoder(bytes.NewReader(readFile(t, path)))
	var docs []map[string]any
	for {
		var d map[string]any
		err := dec.Decode(&d)
		if errors.Is(err, io.EOF) {
			return docs
		}
		require.NoError(t, err, path)
		docs = append(docs, d)
	}
}

// at walks a decoded YAML value along keys (strings) and indexes (ints),
// failing the test when the path does not exist.
func at(t *testing.T, v any, path ...any) any {
	t.Helper()
	for i, k := range path {
		switch key := k.(type) {
		case string:
			m, ok := v.(map[string]any)
			require.True(t, ok, "at %v: not a mapping", path[:i])
			v, ok = m[key]
			require.True(t, ok, "no %v", path[:i+1])
		case int:
			l, ok := v.([]any)
			require.True(t, ok && key < len(l), "at %v: not a list of more than %d entries", path[:i], key)
			v = l[key]
		}
	}
	return v
}

// words joins a container's command and args as a shell would see them.
func words(t *testing.T, container any) string {
	t.Helper()
	var out []string
	m := container.(map[string]any)
	for _, k := range []string{"command", "args"} {
		if l, ok := m[k].([]any); ok {
			for _, w := range l {
				out = append(out, fmt.Sprint(w))
			}
		}
	}
	return strings.Join(out, " ")
}

// The Kubernetes example: an Indexed Job whose pods each run one shard with
// --shard auto, and a Job that merges and gates, on the same volume.
func TestKubernetesIndexedJobExample(t *testing.T) {
	docs := yamlDocs(t, filepath.Join(examplesDir, "k8s-indexed-job.yaml"))
	require.Len(t, docs, 2)
	var shards, gate map[string]any
	for _, d := range docs {
		require.Equal(t, "batch/v1", d["apiVersion"])
		require.Equal(t, "Job", d["kind"])
		if at(t, d, "spec").(map[string]any)["completionMode"] == "Indexed" {
			shards = d
		} else {
			gate = d
		}
	}
	require.NotNil(t, shards, "no Job with completionMode Indexed")
	require.NotNil(t, gate, "no merge-and-gate Job")

	n := at(t, shards, "spec", "completions").(int)
	require.Greater(t, n, 1)
	require.Equal(t, n, at(t, shards, "spec", "parallelism"), "completions and parallelism differ")
	pod := at(t, shards, "spec", "template", "spec")
	require.Equal(t, "Never", at(t, pod, "restartPolicy"))
	cmd := words(t, at(t, pod, "containers", 0))
	require.Contains(t, cmd, "sparsegate run")
	require.Contains(t, cmd, "--shard auto")
	require.Contains(t, cmd, "--shard-count "+strconv.Itoa(n), "--shard-count must equal completions")
	require.Contains(t, cmd, "--results /out/shard-$(JOB_COMPLETION_INDEX).json")
	require.Contains(t, cmd, "--candidate ")

	gcmd := words(t, at(t, gate, "spec", "template", "spec", "containers", 0))
	require.Contains(t, gcmd, "sparsegate merge --out /out/merged.json /out/shard-*.json")
	require.Regexp(t, `sparsegate compare .*--results /out/merged.json`, gcmd)
	require.Contains(t, gcmd, "--golden ")
	require.Contains(t, gcmd, "--junit ")
	require.Equal(t, 0, at(t, gate, "spec", "backoffLimit"), "a failed gate must not be retried")

	// Both Jobs write and read /out on the same claim.
	claim := func(job map[string]any) string {
		return at(t, job, "spec", "template", "spec", "volumes", 0, "persistentVolumeClaim", "claimName").(string)
	}
	require.Equal(t, claim(shards), claim(gate))
	for _, job := range []map[string]any{shards, gate} {
		found := false
		for _, m := range at(t, job, "spec", "template", "spec", "containers", 0, "volumeMounts").([]any) {
			found = found || m.(map[string]any)["mountPath"] == "/out"
		}
		require.True(t, found, "%v mounts no /out", at(t, job, "metadata", "name"))
	}
}

// The CI matrix example: N shard jobs from a matrix over
// SPARSEGATE_SHARD_INDEX (1 … N, with SPARSEGATE_SHARD_COUNT = N), uploading
// their results, and a gate job that needs them, merges, compares and
// publishes JUnit. The keys are GitLab CI's (parallel:matrix, needs,
// artifacts:reports:junit; from memory of its documentation).
func TestCIMatrixExample(t *testing.T) {
	path := filepath.Join(examplesDir, "ci-matrix.yml")
	text := string(readFile(t, path))
	require.Contains(t, strings.ToLower(text), "example")
	docs := yamlDocs(t, path)
	require.Len(t, docs, 1)
	ci := docs[0]

	n, err := strconv.Atoi(at(t, ci, "variables", "SPARSEGATE_SHARD_COUNT").(string))
	require.NoError(t, err)
	require.Greater(t, n, 1)
	var shardJob, gateJob string
	for name, v := range ci {
		job, ok := v.(map[string]any)
		if !ok {
			continue
		}
		if _, ok := job["parallel"]; ok {
			shardJob = name
		}
		if _, ok := job["needs"]; ok {
			gateJob = name
		}
	}
	require.NotEmpty(t, shardJob, "no matrix job")
	require.NotEmpty(t, gateJob, "no job that depends on the shards")

	// The matrix expands to exactly 1 … N.
	matrix := at(t, ci, shardJob, "parallel", "matrix").([]any)
	var indexes []string
	for _, entry := range matrix {
		for _, v := range at(t, entry, "SPARSEGATE_SHARD_INDEX").([]any) {
			indexes = append(indexes, fmt.Sprint(v))
		}
	}
	var want []string
	for i := 1; i <= n; i++ {
		want = append(want, strconv.Itoa(i))
	}
	require.Equal(t, want, indexes, "the matrix must list shards 1 … SPARSEGATE_SHARD_COUNT")
	script := fmt.Sprint(at(t, ci, shardJob, "script"))
	require.Contains(t, script, "--shard auto")
	require.Contains(t, script, `--results "shard-$SPARSEGATE_SHARD_INDEX.json"`)
	require.Contains(t, fmt.Sprint(at(t, ci, shardJob, "artifacts", "paths")), "shard-*.json")

	require.Equal(t, []any{shardJob}, at(t, ci, gateJob, "needs"))
	gscript := fmt.Sprint(at(t, ci, gateJob, "script"))
	require.Contains(t, gscript, "sparsegate merge --out merged.json shard-*.json")
	require.Regexp(t, `sparsegate compare .*--results merged.json .*--junit junit.xml`, gscript)
	require.Equal(t, "junit.xml", at(t, ci, gateJob, "artifacts", "reports", "junit"))
	require.Equal(t, "always", at(t, ci, gateJob, "artifacts", "when"))
}

// The example commands use only flags the commands accept: each line is
// parsed by the command's own flag set (with --help appended, so nothing
// runs).
func TestExampleCommandsParse(t *testing.T) {
	for _, cmd := range [][]string{
		{"run", "--suite", "s.yaml", "--candidate", "b", "--shard", "auto", "--shard-count", "4", "--cache", "c", "--results", "r.json"},
		{"merge", "--out", "merged.json", "a.json"},
		{"compare", "--suite", "s.yaml", "--results", "merged.json", "--golden", "g", "--junit", "j.xml", "--markdown", "s.md", "--html", "r.html"},
	} {
		code, out, errs := sparsegate(t, append(cmd, "--help")...)
		require.Equal(t, 0, code, "%v: %s%s", cmd, out, errs)
		require.NotContains(t, errs, "unknown flag")
	}
}

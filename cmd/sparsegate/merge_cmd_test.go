package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Merging shards that do not make one whole run is bad input: exit 2 with
// a message saying what is wrong, and no merged file.
func TestMergeBadInput(t *testing.T) {
	tmp := t.TempDir()
	p := func(name string) string { return filepath.Join(tmp, name) }
	shardOf := func(suite, name string, i, n int) string {
		out := p(name)
		code, o, errs := sparsegate(t, "run", "--suite", suite, "--base", demoModelSrc, "--no-cache", "--probe", "status-mc",
			"--shard", fmt.Sprintf("%d/%d", i, n), "--results", out)
		require.Equal(t, 0, code, o+errs)
		return out
	}
	suiteA := writeSuite(t, smallSuite)
	suiteB := writeSuite(t, strings.Replace(smallSuite, "name: cmdtest", "name: other", 1))
	a1, a2, a3 := shardOf(suiteA, "a1.json", 1, 3), shardOf(suiteA, "a2.json", 2, 3), shardOf(suiteA, "a3.json", 3, 3)
	b2 := shardOf(suiteB, "b2.json", 2, 3)
	half := shardOf(suiteA, "half.json", 1, 2)

	// The good case first, so the failures below are about the input.
	code, out, errs := sparsegate(t, "merge", "--out", p("ok.json"), a1, a2, a3)
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "merged 3 shards")

	garbage := p("garbage.json")
	require.NoError(t, os.WriteFile(garbage, []byte("{not json"), 0o644))
	for _, c := range []struct {
		name  string
		files []string
		want  []string
	}{
		{"different suites", []string{a1, b2, a3}, []string{"results 2 are of a different suite", "2 = " + b2}},
		{"duplicated shard", []string{a1, a2, a2}, []string{"shard 2/3 is given twice", "3 = " + a2}},
		{"missing shard", []string{a1, a3}, []string{"2 of 3 shards given", "needs all of them"}},
		{"different shard counts", []string{a1, half}, []string{"shard 1/2", "of 3 shards"}},
		{"not a results file", []string{a1, garbage}, []string{"garbage.json"}},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := p("merged-" + strings.ReplaceAll(c.name, " ", "-") + ".json")
			code, stdout, errs := sparsegate(t, append([]string{"merge", "--out", out}, c.files...)...)
			require.Equal(t, 2, code, stdout+errs)
			for _, w := range c.want {
				require.Contains(t, errs, w)
			}
			require.NotContains(t, errs, "internal fault")
			require.NoFileExists(t, out)
		})
	}

	code, _, errs = sparsegate(t, "merge", a1, a2)
	require.Equal(t, 2, code)
	require.Contains(t, errs, "give --out FILE")
}

package main

import (
	"bytes"
	"fmt"
	"os/exec"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/sparsity"
)

// buildBinary compiles the command into dir and returns its path, skipping
// the test when no go tool is on the PATH.
func buildBinary(t *testing.T, dir string) string {
	t.Helper()
	gotool, err := exec.LookPath("go")
	if err != nil {
		t.Skipf("skipping: the go tool is not on the PATH, so the binary cannot be built (%v)", err)
	}
	bin := filepath.Join(dir, "sparsegate")
	cmd := exec.Command(gotool, "build", "-o", bin, "./cmd/sparsegate")
	cmd.Dir = "../.."
	out, err := cmd.CombinedOutput()
	require.NoError(t, err, "go build: %s", out)
	return bin
}

// Four shard processes of the real binary, merged and compared, give the
// verdict and JUnit XML of the unsharded run (wall times aside), and the
// merged Results equal the unsharded Results.
func TestShardedProcessesMatchUnsharded(t *testing.T) {
	tmp := t.TempDir()
	bin := buildBinary(t, tmp)
	suite := writeSuite(t, shardSuite)
	healthy := writeBuild(t, demoModelSrc, func(int) (sparsity.Rule, sparsity.Rule) { return oracle(384), oracle(4) })
	cand := writeBuild(t, demoModelSrc, func(int) (sparsity.Rule, sparsity.Rule) { return oracle(96), oracle(2) })
	p := func(name string) string { return filepath.Join(tmp, name) }
	gdir := p("golden")

	// Golden files from the healthy build (every probe runs with a candidate).
	code, out, errs := sparsegate(t, "run", "--suite", suite, "--candidate", healthy, "--no-cache", "--results", p("healthy.json"))
	require.Equal(t, 0, code, out+errs)
	code, out, errs = sparsegate(t, "golden", "update", "--suite", suite, "--golden", gdir, "--from", p("healthy.json"), "--who", "t", "--reason", "healthy build")
	require.Equal(t, 0, code, out+errs)

	// The unsharded run.
	wantCode, out, errs := sparsegate(t, "run", "--suite", suite, "--candidate", cand, "--no-cache", "--golden", gdir,
		"--results", p("whole.json"), "--json", p("whole-verdict.json"), "--junit", p("whole.xml"))
	require.Contains(t, []int{0, 1}, wantCode, out+errs)
	require.Regexp(t, `(?m)^flips\s+flips\s+ran\s+\d+`, out)

	// Four shard processes at once, one thread each.
	var cmds []*exec.Cmd
	var outs []*bytes.Buffer
	var shards []string
	for i := 1; i <= 4; i++ {
		res := p(fmt.Sprintf("shard-%d.json", i))
		shards = append(shards, res)
		c := exec.Command(bin, "run", "--suite", suite, "--candidate", cand, "--no-cache", "--threads", "1",
			"--shard", fmt.Sprintf("%d/4", i), "--results", res)
		var b bytes.Buffer
		c.Stdout, c.Stderr = &b, &b
		require.NoError(t, c.Start())
		cmds, outs = append(cmds, c), append(outs, &b)
	}
	for i, c := range cmds {
		require.NoError(t, c.Wait(), "shard %d/4: %s", i+1, outs[i])
		require.Contains(t, outs[i].String(), fmt.Sprintf("shard %d/4", i+1))
	}

	merge := exec.Command(bin, append([]string{"merge", "--out", p("merged.json")}, shards...)...)
	mout, err := merge.CombinedOutput()
	require.NoError(t, err, "merge: %s", mout)
	require.Contains(t, string(mout), "merged 4 shards into "+p("merged.json"))
	require.Equal(t, zeroSeconds(t, readFile(t, p("whole.json"))), zeroSeconds(t, readFile(t, p("merged.json"))))

	cmp := exec.Command(bin, "compare", "--suite", suite, "--results", p("merged.json"), "--golden", gdir,
		"--json", p("merged-verdict.json"), "--junit", p("merged.xml"))
	cout, err := cmp.CombinedOutput()
	gotCode := 0
	if ee, ok := err.(*exec.ExitError); ok {
		gotCode = ee.ExitCode()
	} else {
		require.NoError(t, err)
	}
	require.Equal(t, wantCode, gotCode, "compare: %s", cout)
	require.Equal(t, zeroSeconds(t, readFile(t, p("whole-verdict.json"))), zeroSeconds(t, readFile(t, p("merged-verdict.json"))))
	require.Equal(t, zeroJUnitTimes(readFile(t, p("whole.xml"))), zeroJUnitTimes(readFile(t, p("merged.xml"))))
}

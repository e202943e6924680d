package main

import (
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/sparsity"
)

// The whole gate on a small suite: golden files recorded from the base (only
// with a reason), verified, passed by the base, failed by a bad sparse build
// with every report written; the saved verdict re-renders byte-identically
// and comparing the saved results gives the same verdict.
func TestGoldenFlow(t *testing.T) {
	suite := writeSuite(t, smallSuite)
	tmp := t.TempDir()
	gdir := filepath.Join(tmp, "golden")
	baseRes := filepath.Join(tmp, "base.json")
	code, _, errs := sparsegate(t, "run", "--suite", suite, "--base", demoModelSrc, "--no-cache", "--results", baseRes)
	require.Equal(t, 0, code, errs)

	// No reason: refused, nothing written.
	code, _, errs = sparsegate(t, "golden", "update", "--suite", suite, "--golden", gdir, "--from", baseRes, "--who", "tester")
	require.Equal(t, 2, code, errs)
	require.Contains(t, errs, "without a reason")
	_, err := os.Stat(gdir)
	require.True(t, os.IsNotExist(err), "golden update without --reason created %s", gdir)

	code, out, errs := sparsegate(t, "golden", "update", "--suite", suite, "--golden", gdir, "--from", baseRes, "--who", "tester", "--reason", "first approval")
	require.Equal(t, 0, code, errs)
	require.Contains(t, out, "updated "+gdir)
	for _, f := range []string{"ppl.golden", "status-mc.golden", "APPROVALS.log"} {
		require.FileExists(t, filepath.Join(gdir, f))
	}
	require.Contains(t, string(readFile(t, filepath.Join(gdir, "APPROVALS.log"))), "first approval")

	code, out, errs = sparsegate(t, "golden", "verify", "--golden", gdir, "--suite", suite)
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "2 golden files, 1 approval entries")
	require.Contains(t, out, "ok")

	// The approved base passes its own golden files.
	code, out, errs = sparsegate(t, "run", "--suite", suite, "--base", demoModelSrc, "--no-cache", "--golden", gdir)
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "gate: PASSED (2 pass)")

	// A build keeping 8 of 512 neurons and 1 of 4 heads per token fails.
	bad := writeBuild(t, demoModelSrc, func(int) (sparsity.Rule, sparsity.Rule) { return oracle(8), oracle(1) })
	rep := func(name string) string { return filepath.Join(tmp, name) }
	candRes := rep("cand.json")
	code, out, errs = sparsegate(t, "run", "--suite", suite, "--candidate", bad, "--no-cache", "--golden", gdir, "--results", candRes,
		"--junit", rep("junit.xml"), "--json", rep("verdict.json"), "--markdown", rep("summary.md"), "--html", rep("report.html"), "--diff", rep("diff.txt"))
	require.Equal(t, 1, code, out+errs)
	require.Contains(t, out, "gate: FAILED")
	require.Contains(t, errs, "the gate failed against "+gdir)
	diff := string(readFile(t, rep("diff.txt")))
	require.Contains(t, diff, "ppl")
	require.Contains(t, out, diff, "the diff on stdout is not the one --diff wrote")
	junit := string(readFile(t, rep("junit.xml")))
	require.Contains(t, junit, "<testsuites")
	require.Contains(t, junit, "<failure")
	require.True(t, strings.HasPrefix(string(readFile(t, rep("report.html"))), "<!DOCTYPE html>"))
	md := readFile(t, rep("summary.md"))
	require.Contains(t, string(md), "ppl")

	// report re-renders the saved verdict byte for byte.
	code, _, errs = sparsegate(t, "report", "--verdict", rep("verdict.json"), "--markdown", rep("again.md"), "--junit", rep("again.xml"))
	require.Equal(t, 0, code, errs)
	require.Equal(t, string(md), string(readFile(t, rep("again.md"))))
	require.Equal(t, junit, string(readFile(t, rep("again.xml"))))

	// compare on the saved results gives run --golden's verdict.
	code, out, errs = sparsegate(t, "compare", "--suite", suite, "--results", candRes, "--golden", gdir, "--json", rep("verdict2.json"))
	require.Equal(t, 1, code, out+errs)
	require.Contains(t, out, "gate: FAILED")
	require.Equal(t, zeroSeconds(t, readFile(t, rep("verdict.json"))), zeroSeconds(t, readFile(t, rep("verdict2.json"))))

	// Verify notices a golden file edited behind the log's back.
	p := filepath.Join(gdir, "ppl.golden")
	b := readFile(t, p)
	require.Contains(t, string(b), "metric perplexity ")
	require.NoError(t, os.WriteFile(p, []byte(strings.Replace(string(b), "metric perplexity ", "metric perplexity 1", 1)), 0o644))
	code, out, errs = sparsegate(t, "golden", "verify", "--golden", gdir, "--suite", suite)
	require.Equal(t, 1, code, out+errs)
	require.NotContains(t, out, "\nok\n")
}

func TestReportAndCompareBadUsage(t *testing.T) {
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"report", "--markdown", "m.md"}, "--verdict FILE is required"},
		{[]string{"report", "--verdict", "v.json"}, "name at least one output"},
		{[]string{"report", "--verdict", filepath.Join(t.TempDir(), "none.json"), "--markdown", "m.md"}, "none.json"},
		{[]string{"compare", "--results", "r.json"}, "--results FILE and --golden DIR are required"},
		{[]string{"golden"}, "name a subcommand"},
		{[]string{"golden", "frob", "--golden", "g"}, `unknown subcommand "frob"`},
		{[]string{"golden", "update", "--golden", "g"}, "--from RESULTS_OR_BUILD is required"},
	} {
		code, out, errs := sparsegate(t, c.args...)
		require.Equal(t, 2, code, "%v: %s%s", c.args, out, errs)
		require.Contains(t, errs, c.want, "%v", c.args)
	}
}

package golden

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"
	"time"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

var approvedAt = time.Date(2026, 12, 2, 1, 23, 45, 678, time.FixedZone("CET", 3600))

func twoProbeSuite(t *testing.T) *suites.Suite {
	return parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}")+pplYAML("ppl", "perplexity:"))
}

func twoProbeRun(t *testing.T, s *suites.Suite, right int) *results.Results {
	return newResults(s, choiceProbe(t, "mc", bools(10, right)), pplProbe(t, "ppl", []float64{1.25, 1.5}))
}

func updateOpts(dir string, s *suites.Suite, r *results.Results) UpdateOptions {
	return UpdateOptions{Dir: dir, Suite: s, Results: r, Reason: "rc7 approved after review", Who: "release-bot", Now: approvedAt}
}

func TestPlanUpdateRefuses(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	r := twoProbeRun(t, s, 8)

	o := updateOpts(dir, s, r)
	o.Reason = "  "
	_, err := PlanUpdate(o)
	require.ErrorContains(t, err, "without a reason")

	o = updateOpts(dir, s, r)
	o.Who = ""
	_, err = PlanUpdate(o)
	require.ErrorContains(t, err, "without an approver")

	sh := *r
	sh.Shard = results.Shard{Index: 2, Count: 3}
	_, err = PlanUpdate(updateOpts(dir, s, &sh))
	require.ErrorContains(t, err, "shard 2/3")
	require.ErrorContains(t, err, "merge")

	stale := *r
	stale.Suite.Hash = "feed"
	_, err = PlanUpdate(updateOpts(dir, s, &stale))
	require.ErrorContains(t, err, "another version of suite")

	o = updateOpts(dir, s, r)
	o.Probes = []string{"nope"}
	_, err = PlanUpdate(o)
	require.ErrorContains(t, err, `the suite has no probe "nope"`)

	// A probe that errored is refused, named or not.
	bad := twoProbeRun(t, s, 8)
	bad.Probes[0] = &results.Probe{Name: "mc", Kind: suites.Choice, Hash: s.Probe("mc").Hash, Status: results.Failed, Note: "tokenizer mismatch"}
	_, err = PlanUpdate(updateOpts(dir, s, bad))
	require.ErrorContains(t, err, `probe "mc" could not run (tokenizer mismatch)`)
	o = updateOpts(dir, s, bad)
	o.Probes = []string{"mc"}
	_, err = PlanUpdate(o)
	require.ErrorContains(t, err, `probe "mc" did not run`)
	// Leaving it out records the rest.
	o.Probes = []string{"ppl"}
	plan, err := PlanUpdate(o)
	require.NoError(t, err)
	require.Len(t, plan.Files, 1)
	// A skipped probe is left out without complaint, unless it is named.
	skip := twoProbeRun(t, s, 8)
	skip.Probes[1] = &results.Probe{Name: "ppl", Kind: suites.Perplexity, Status: results.Skipped, Note: "not selected"}
	plan, err = PlanUpdate(updateOpts(dir, s, skip))
	require.NoError(t, err)
	require.Equal(t, []string{"mc"}, []string{plan.Files[0].Probe})
	o = updateOpts(dir, s, skip)
	o.Probes = []string{"ppl"}
	_, err = PlanUpdate(o)
	require.ErrorContains(t, err, `probe "ppl" did not run (skipped: not selected)`)
	skip.Probes[0] = &results.Probe{Name: "mc", Kind: suites.Choice, Status: results.Skipped}
	_, err = PlanUpdate(updateOpts(dir, s, skip))
	require.ErrorContains(t, err, "nothing to record")

	// A golden directory that is a symbolic link.
	link := filepath.Join(t.TempDir(), "link")
	require.NoError(t, os.MkdirAll(dir, 0o755))
	if err := os.Symlink(dir, link); err == nil {
		_, err = PlanUpdate(updateOpts(link, s, r))
		require.ErrorContains(t, err, "is a symbolic link")
	}
}

func TestPlanUpdateRebase(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	plan, err := PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	require.NoError(t, plan.Apply())

	// Other base weights.
	nb := twoProbeRun(t, s, 8)
	nb.Base.WeightsHash = otherBase
	_, err = PlanUpdate(updateOpts(dir, s, nb))
	require.ErrorContains(t, err, "recorded from base weights ba5e")
	require.ErrorContains(t, err, "--rebase")
	o := updateOpts(dir, s, nb)
	o.Rebase = true
	_, err = PlanUpdate(o)
	require.NoError(t, err)

	// Another version of the suite (a data file changed).
	fsys := testData()
	fsys["data/text.txt"] = &fstest.MapFile{Data: []byte("the dog sat on the log\n")}
	s2 := parseSuiteFS(t, choiceYAML("mc", "accuracy: {abs: 0.02}")+pplYAML("ppl", "perplexity:"), fsys)
	require.NotEqual(t, s.Hash, s2.Hash)
	_, err = PlanUpdate(updateOpts(dir, s2, twoProbeRun(t, s2, 8)))
	require.ErrorContains(t, err, "recorded with another version of the suite")
	o = updateOpts(dir, s2, twoProbeRun(t, s2, 8))
	o.Rebase = true
	plan, err = PlanUpdate(o)
	require.NoError(t, err)
	require.NoError(t, plan.Apply())
	rep, err := Verify(dir, s2)
	require.NoError(t, err)
	require.Empty(t, rep.Problems)
}

func TestApplyAndLog(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	r := twoProbeRun(t, s, 8)
	plan, err := PlanUpdate(updateOpts(dir, s, r))
	require.NoError(t, err)
	require.Len(t, plan.Changed(), 2)
	// A new file shows its metrics, not every item record.
	require.Contains(t, plan.Diff(100), "+++ "+Path(dir, "mc")+" (new file)\n+metric accuracy 0.8\n")
	require.Contains(t, plan.Diff(100), "item and unit records)\n")
	_, err = os.Stat(dir)
	require.True(t, os.IsNotExist(err), "planning writes nothing")
	require.NoError(t, plan.Apply())

	for _, p := range r.Probes {
		f, err := ReadFile(Path(dir, p.Name))
		require.NoError(t, err)
		want, err := FromResults(r, p).Encode()
		require.NoError(t, err)
		got, err := f.Encode()
		require.NoError(t, err)
		require.Equal(t, want, got)
	}
	log, err := ReadLog(dir)
	require.NoError(t, err)
	require.Len(t, log, 1)
	e := log[0]
	require.Equal(t, time.Date(2026, 12, 2, 0, 23, 45, 0, time.UTC), e.Time, "UTC, whole seconds")
	require.Equal(t, "release-bot", e.Who)
	require.Equal(t, "rc7 approved after review", e.Reason)
	require.Equal(t, baseHash, e.Fingerprint.BaseWeights)
	require.Equal(t, s.Hash, e.Fingerprint.Suite)
	require.Len(t, e.Probes, 2)
	require.Equal(t, []string{"accuracy new -> 0.8"}, e.Probes[0].Values)
	require.Len(t, e.Probes[0].SHA256, 64)

	first, err := os.ReadFile(Path(dir, "mc"))
	require.NoError(t, err)
	logBytes, err := os.ReadFile(filepath.Join(dir, LogFile))
	require.NoError(t, err)
	require.True(t, strings.HasPrefix(string(logBytes), "approval 2026-12-02T00:23:45Z\nwho \"release-bot\"\nreason \"rc7 approved after review\"\n"))
	require.True(t, strings.HasSuffix(string(logBytes), "end\n"))

	// A second identical update writes identical golden bytes and appends a
	// second entry.
	plan, err = PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	require.Empty(t, plan.Changed())
	require.Empty(t, plan.Diff(100))
	require.NoError(t, plan.Apply())
	again, err := os.ReadFile(Path(dir, "mc"))
	require.NoError(t, err)
	require.Equal(t, first, again)
	log, err = ReadLog(dir)
	require.NoError(t, err)
	require.Len(t, log, 2)
	require.Equal(t, []string{"accuracy 0.8 -> 0.8"}, log[1].Probes[0].Values)

	// A changed value shows in the plan's diff and the log.
	o := updateOpts(dir, s, twoProbeRun(t, s, 9))
	o.Probes = []string{"mc"}
	plan, err = PlanUpdate(o)
	require.NoError(t, err)
	require.Len(t, plan.Changed(), 1)
	d := plan.Diff(100)
	require.Contains(t, d, "-metric accuracy 0.8\n+metric accuracy 0.9\n")
	require.NoError(t, plan.Apply())
	log, err = ReadLog(dir)
	require.NoError(t, err)
	require.Equal(t, []string{"accuracy 0.8 -> 0.9"}, log[2].Probes[0].Values)
	rep, err := Verify(dir, s)
	require.NoError(t, err)
	require.Empty(t, rep.Problems)
	require.Equal(t, 3, rep.Entries)
	require.Equal(t, 2, rep.Files)
	noTemps(t, dir)
}

// noTemps asserts dir holds only golden files and the log.
func noTemps(t *testing.T, dir string) {
	t.Helper()
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	for _, e := range entries {
		require.True(t, strings.HasSuffix(e.Name(), Ext) || e.Name() == LogFile, "left behind: %s", e.Name())
	}
}

func TestApplyReadOnlyDir(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	plan, err := PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	require.NoError(t, plan.Apply())
	before := snapshot(t, dir)

	plan, err = PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 9)))
	require.NoError(t, err)
	require.NoError(t, os.Chmod(dir, 0o555))
	t.Cleanup(func() { os.Chmod(dir, 0o755) })
	probe := filepath.Join(dir, "probe-write")
	if f, err := os.Create(probe); err == nil {
		f.Close()
		os.Remove(probe)
		t.Skip("the directory is writable despite mode 0555 (running as root?)")
	}
	err = plan.Apply()
	require.Error(t, err)
	require.ErrorContains(t, err, "writing "+Path(dir, "mc"))
	require.Equal(t, before, snapshot(t, dir), "the old files are intact")
	noTemps(t, dir)
}

// snapshot returns every file of dir by name.
func snapshot(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(dir, e.Name()))
		require.NoError(t, err)
		out[e.Name()] = string(b)
	}
	return out
}

func TestVerify(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	_, err := Verify(dir, s)
	require.ErrorContains(t, err, "golden directory", "verify needs the directory")

	r := twoProbeRun(t, s, 8)
	o := updateOpts(dir, s, r)
	o.Probes = []string{"mc"}
	plan, err := PlanUpdate(o)
	require.NoError(t, err)
	require.NoError(t, plan.Apply())
	rep, err := Verify(dir, s)
	require.NoError(t, err)
	require.Equal(t, Report{Files: 1, Entries: 1}, *rep, "verify passes right after apply")

	// A golden file no log entry approved.
	data, err := FromResults(r, r.Probe("ppl")).Encode()
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(Path(dir, "ppl"), data, 0o644))
	// A hand-edited golden file (still well formed).
	mc, err := os.ReadFile(Path(dir, "mc"))
	require.NoError(t, err)
	edited := strings.Replace(string(mc), "metric accuracy 0.8\n", "metric accuracy 0.85\n", 1)
	require.NotEqual(t, string(mc), edited)
	require.NoError(t, os.WriteFile(Path(dir, "mc"), []byte(edited), 0o644))
	rep, err = Verify(dir, s)
	require.NoError(t, err)
	require.Equal(t, 2, rep.Files)
	require.Equal(t, []string{
		Path(dir, "mc") + ": its content differs from what the latest approval recorded (edited by hand, or an interrupted update)",
		Path(dir, "ppl") + ": no approval log entry records it",
	}, rep.Problems)

	// A file named for another probe, a probe the suite lacks, another
	// kind, and another build.
	other := parseSuite(t, choiceYAML("mc", "accuracy: {abs: 0.02}")+choiceYAML("ppl", "accuracy:"))
	rep, err = Verify(dir, other)
	require.NoError(t, err)
	require.Contains(t, rep.Problems, Path(dir, "ppl")+": kind perplexity, but the suite's probe is choice")
	require.NoError(t, os.WriteFile(Path(dir, "zzz"), data, 0o644))
	nb := twoProbeRun(t, s, 8)
	nb.Candidate.ManifestHash = "beef"
	data, err = FromResults(nb, nb.Probe("ppl")).Encode()
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(Path(dir, "ppl"), data, 0o644))
	rep, err = Verify(dir, s)
	require.NoError(t, err)
	require.Contains(t, rep.Problems, Path(dir, "zzz")+`: records probe "ppl" but is named for "zzz"`)
	require.Contains(t, rep.Problems, Path(dir, "zzz")+`: the suite has no probe "zzz"`)
	require.Contains(t, rep.Problems, Path(dir, "ppl")+": its fingerprint differs from "+Path(dir, "mc")+"'s (recorded from another build or suite version)")

	// A damaged golden file or log is an error naming the place.
	require.NoError(t, os.WriteFile(Path(dir, "zzz"), []byte("sparsegate-golden 1\nprobe \"zzz\"\nkind choice\nitem \"a\"\n"), 0o644))
	_, err = Verify(dir, s)
	require.ErrorContains(t, err, Path(dir, "zzz")+":4: ")
	require.NoError(t, os.Remove(Path(dir, "zzz")))
	logPath := filepath.Join(dir, LogFile)
	lb, err := os.ReadFile(logPath)
	require.NoError(t, err)
	require.NoError(t, os.WriteFile(logPath, []byte(strings.TrimSuffix(string(lb), "end\n")), 0o644))
	_, err = Verify(dir, s)
	require.ErrorContains(t, err, logPath+":")
	require.ErrorContains(t, err, "no 'end' line")
}

func TestParseLog(t *testing.T) {
	good := "approval 2026-12-02T01:23:45Z\nwho \"a\"\nreason \"r\"\nfingerprint base_weights 5d41\nfingerprint harness \"0.1.0\"\n" +
		"probe \"lookup-mc\" sha256 9f2c accuracy 0.9 -> 0.95 margin_mean new -> 2\nprobe \"p\" sha256 03aa\nend\n"
	es, err := parseLog("L", []byte(good))
	require.NoError(t, err)
	require.Len(t, es, 1)
	require.Equal(t, []string{"accuracy 0.9 -> 0.95", "margin_mean new -> 2"}, es[0].Probes[0].Values)
	require.Empty(t, es[0].Probes[1].Values)
	// encode is parseLog's inverse.
	require.Equal(t, good, es[0].encode())

	for _, c := range []struct{ data, where, msg string }{
		{"who \"a\"\n", "L:1: ", "expected an 'approval TIME' line"},
		{"approval yesterday\n", "L:1: ", "bad time"},
		{"approval 2026-12-02T01:23:45Z\nwho a\n", "L:2: ", "who must be a quoted string"},
		{"approval 2026-12-02T01:23:45Z\nreason \"r\"\nprobe \"p\" sha256 xyz\n", "L:3: ", "expected 'sha256 HEX'"},
		{"approval 2026-12-02T01:23:45Z\nreason \"r\"\nprobe \"p\" sha256 03aa accuracy 1\n", "L:3: ", "values must be 'metric old -> new'"},
		{"approval 2026-12-02T01:23:45Z\nwho \"a\"\nend\n", "L:3: ", "an entry without a reason"},
		{"approval 2026-12-02T01:23:45Z\nreason \"r\"\nsigned x\n", "L:3: ", `unknown line "signed"`},
		{"approval 2026-12-02T01:23:45Z\nreason \"r\"\n", "L:3: ", "no 'end' line"},
	} {
		_, err := parseLog("L", []byte(c.data))
		require.Error(t, err, c.data)
		require.True(t, strings.HasPrefix(err.Error(), c.where), "%q should start with %q", err, c.where)
		require.Contains(t, err.Error(), c.msg)
	}
}

// TestApplyFailsCleanly makes Apply fail in ways root cannot bypass: an
// unreadable approval log (a directory in its place) before any rename, and
// a golden file that cannot be replaced (a directory) at the first rename.
func TestApplyFailsCleanly(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	plan, err := PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	require.NoError(t, plan.Apply())
	before := snapshot(t, dir)

	// The log cannot be read: nothing is renamed, no temporary file is left.
	plan, err = PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 9)))
	require.NoError(t, err)
	logPath := filepath.Join(dir, LogFile)
	require.NoError(t, os.Rename(logPath, logPath+".keep"))
	require.NoError(t, os.Mkdir(logPath, 0o755))
	err = plan.Apply()
	require.ErrorContains(t, err, "reading approval log")
	require.NoError(t, os.Remove(logPath))
	require.NoError(t, os.Rename(logPath+".keep", logPath))
	require.Equal(t, before, snapshot(t, dir))

	// A golden file is not what the plan saw (a directory in its place):
	// Apply refuses before writing anything; the rest and the log stay as
	// they were, and no temporary file is left.
	mc := Path(dir, "mc")
	require.NoError(t, os.Rename(mc, mc+".keep"))
	require.NoError(t, os.MkdirAll(filepath.Join(mc, "x"), 0o755))
	err = plan.Apply()
	require.ErrorContains(t, err, mc)
	require.NoError(t, os.RemoveAll(mc))
	require.NoError(t, os.Rename(mc+".keep", mc))
	require.Equal(t, before, snapshot(t, dir))
}

// An update interrupted after it committed (journal written, some renames
// not done) is rolled forward by the next operation; one interrupted before
// it committed leaves the old files, and its temporaries are removed.
func TestInterruptedUpdateRecovers(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	plan, err := PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	require.NoError(t, plan.Apply())
	plan, err = PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 9)))
	require.NoError(t, err)
	// Simulate a crash after the journal: stage the files and the journal by hand.
	var rs []renaming
	for _, f := range plan.Files {
		tmp := filepath.Join(dir, tempPrefix+"t-"+f.Probe)
		require.NoError(t, os.WriteFile(tmp, f.New, 0o644))
		rs = append(rs, renaming{tmp, f.Path})
	}
	require.NoError(t, writeJournal(dir, rs))
	require.NoError(t, os.Rename(rs[0].tmp, rs[0].dst)) // one rename happened
	rep, err := Verify(dir, s)                          // rolls forward
	require.NoError(t, err)
	for _, f := range plan.Files {
		got, err := os.ReadFile(f.Path)
		require.NoError(t, err)
		require.Equal(t, string(f.New), string(got))
	}
	_, err = os.Stat(filepath.Join(dir, PendingFile))
	require.True(t, os.IsNotExist(err))
	// The log was not part of this hand-made journal, so verify flags the files.
	require.NotEmpty(t, rep.Problems)

	// A crash before the journal: stray temporaries only; the next operation removes them.
	stray := filepath.Join(dir, tempPrefix+"stray")
	require.NoError(t, os.WriteFile(stray, []byte("half"), 0o644))
	require.NoError(t, Recover(dir))
	_, err = os.Stat(stray)
	require.True(t, os.IsNotExist(err))
}

// A second update while one holds the lock fails with a clear message; a
// lock left by a process that no longer exists is taken over.
func TestConcurrentUpdatesAreRefused(t *testing.T) {
	s := twoProbeSuite(t)
	dir := filepath.Join(t.TempDir(), "golden")
	require.NoError(t, os.MkdirAll(dir, 0o755))
	plan, err := PlanUpdate(updateOpts(dir, s, twoProbeRun(t, s, 8)))
	require.NoError(t, err)
	unlock, err := lock(dir)
	require.NoError(t, err)
	b, err := os.ReadFile(filepath.Join(dir, LockFile))
	require.NoError(t, err)
	require.Equal(t, fmt.Sprintf("%d\n", os.Getpid()), string(b), "the lock is never seen without its pid")
	err = plan.Apply()
	require.ErrorContains(t, err, "another golden update is running")
	unlock()
	// A stale lock: a pid that cannot exist.
	require.NoError(t, os.WriteFile(filepath.Join(dir, LockFile), []byte("2147483646\n"), 0o644))
	require.NoError(t, plan.Apply())
	_, err = os.Stat(filepath.Join(dir, LockFile))
	require.True(t, os.IsNotExist(err), "the lock is released")
}

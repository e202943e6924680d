package main_test

// Never a silent pass: every way a run can go wrong makes the gate fail
// (exit 1) or the command refuse (exit 2), and a failing gate names its
// reason in the JUnit XML and in the diff.

import (
	"encoding/binary"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"sparsegate/harness/results"
)

// requireGateReason checks that the JUnit XML holds a <failure> or <error>
// element whose text includes reason, and that the diff includes it too.
func requireGateReason(t *testing.T, junit, diff []byte, element, reason string) {
	t.Helper()
	x := string(junit)
	if !strings.Contains(x, "<"+element+" ") {
		t.Errorf("the JUnit XML has no <%s> element:\n%s", element, x)
	}
	if !strings.Contains(x, reason) {
		t.Errorf("the JUnit XML does not give the reason %q:\n%s", reason, x)
	}
	if !strings.Contains(string(diff), reason) {
		t.Errorf("the diff does not give the reason %q:\n%s", reason, diff)
	}
}

// nanModel copies the demo model into dir/nan with one NaN (F16 0x7e00,
// IEEE 754 binary16) in the token embedding. The head is tied to the
// embedding, so that token's logit is NaN on every forward pass.
func nanModel(t *testing.T, f *relFixture, dir string) string {
	t.Helper()
	m := filepath.Join(dir, "nan")
	copyTree(t, f.model, m)
	st := filepath.Join(m, "model.safetensors")
	b := readBytes(t, st)
	start := 8 + int(binary.LittleEndian.Uint64(b[:8]))
	copy(b[start+100:], []byte{0x00, 0x7e})
	writeFile(t, st, b)
	return m
}

// A base checkpoint with NaN weights: every probe errors ("non-finite
// logits"), so the gated metrics have no finite value; the gate fails with
// exit 1 and the reason is in the JUnit <error> elements and the diff.
func TestNaNWeightsFailTheGate(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	g := filepath.Join(dir, "g")
	f.mustSG(t, dir, 0, "golden", "update", "--suite", f.suite, "--golden", g, "--from", f.baseRes, "--reason", "healthy base", "--who", "t")
	r := f.mustSG(t, dir, 1, "run", "--suite", f.suite, "--base", nanModel(t, f, dir), "--no-cache", "--golden", g, "--junit", "j.xml", "--diff", "d.txt", "--json", "v.json")
	if !strings.Contains(r.stdout, "gate: FAILED (2 error)") {
		t.Errorf("stdout does not report two errors:\n%s", r.stdout)
	}
	requireGateReason(t, readBytes(t, filepath.Join(dir, "j.xml")), readBytes(t, filepath.Join(dir, "d.txt")), "error", "non-finite logits")
	for _, p := range []string{"ppl", "mc"} {
		if !strings.Contains(string(readBytes(t, filepath.Join(dir, "d.txt"))), "--- probe "+p) {
			t.Errorf("the diff does not list probe %s", p)
		}
	}
}

// A probe that could not run, in saved results: compare fails the gate
// (exit 1) and gives the probe's own note as the reason.
func TestErroredProbeInSavedResultsFailsTheGate(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	r, err := results.Load(f.candRes)
	if err != nil {
		t.Fatal(err)
	}
	p := r.Probe("mc")
	p.Status, p.Note, p.Metrics, p.Items = results.Failed, "item \"status-0003\": the engine ran out of patience", nil, nil
	saved := filepath.Join(dir, "errored.json")
	if err := r.Save(saved); err != nil {
		t.Fatal(err)
	}
	f.mustSG(t, dir, 1, "compare", "--suite", f.suite, "--results", saved, "--golden", f.golden, "--junit", "j.xml", "--diff", "d.txt")
	requireGateReason(t, readBytes(t, filepath.Join(dir, "j.xml")), readBytes(t, filepath.Join(dir, "d.txt")), "error", "the engine ran out of patience")
}

// A gated metric absent from saved results (the probe ran but did not
// record it): the metric is missing and the gate fails.
func TestMissingGatedMetricFailsTheGate(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	r, err := results.Load(f.candRes)
	if err != nil {
		t.Fatal(err)
	}
	p := r.Probe("ppl")
	var kept []results.Metric
	for _, m := range p.Metrics {
		if m.Name != "perplexity" {
			kept = append(kept, m)
		}
	}
	p.Metrics = kept
	saved := filepath.Join(dir, "no-ppl.json")
	if err := r.Save(saved); err != nil {
		t.Fatal(err)
	}
	res := f.mustSG(t, dir, 1, "compare", "--suite", f.suite, "--results", saved, "--golden", f.golden, "--junit", "j.xml", "--diff", "d.txt")
	if !strings.Contains(res.stdout, "missing") {
		t.Errorf("stdout does not say missing:\n%s", res.stdout)
	}
	junit := string(readBytes(t, filepath.Join(dir, "j.xml")))
	if !strings.Contains(junit, "<failure ") || !strings.Contains(junit, "perplexity") {
		t.Errorf("the JUnit XML has no failure naming perplexity:\n%s", junit)
	}
	if d := string(readBytes(t, filepath.Join(dir, "d.txt"))); !strings.Contains(d, "MISSING") {
		t.Errorf("the diff does not mark the probe MISSING:\n%s", d)
	}
}

// An empty item file is refused when the suite loads (exit 2), before any
// model runs, and no results or reports are written.
func TestEmptyItemFileIsRefusedAtLoad(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	ws := filepath.Join(dir, "s")
	if err := writeSuiteDir(ws, relSuiteYAML); err != nil {
		t.Fatal(err)
	}
	writeFile(t, filepath.Join(ws, "data", "status.jsonl"), nil)
	r := f.mustSG(t, dir, 2, "run", "--suite", filepath.Join(ws, "suite.yaml"), "--base", f.model, "--no-cache", "--golden", f.golden,
		"--results", "r.json", "--junit", "j.xml", "--diff", "d.txt")
	if !strings.Contains(r.stderr, "data/status.jsonl: no items") {
		t.Errorf("stderr does not name the empty file:\n%s", r.stderr)
	}
	for _, out := range []string{"r.json", "j.xml", "d.txt"} {
		if _, err := os.Stat(filepath.Join(dir, out)); err == nil {
			t.Errorf("%s was written", out)
		}
	}
}

// Merging shards 1 and 3 of 3 is refused (exit 2): a missing shard never
// yields results that look whole.
func TestMergeWithAMissingShardIsRefused(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	for _, i := range []string{"1", "3"} {
		f.mustSG(t, dir, 0, "run", "--suite", f.suite, "--candidate", f.build, "--no-cache", "--shard", i+"/3", "--results", "s"+i+".json")
	}
	r := f.mustSG(t, dir, 2, "merge", "--out", "merged.json", "s1.json", "s3.json")
	if !strings.Contains(r.stderr, "2 of 3 shards given") {
		t.Errorf("stderr does not say a shard is missing:\n%s", r.stderr)
	}
	if _, err := os.Stat(filepath.Join(dir, "merged.json")); err == nil {
		t.Error("merged.json was written")
	}
}

// A golden file of a probe the suite no longer has: the probe is missing,
// the gate fails (exit 1), and JUnit and the diff say which file and why.
func TestGoldenFileOfARemovedProbeFailsTheGate(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	g := goldenCopy(t, f, dir)
	old := strings.Replace(string(readBytes(t, filepath.Join(dir, g, "ppl.golden"))), `probe "ppl"`, `probe "old-ppl"`, 1)
	writeFile(t, filepath.Join(dir, g, "old-ppl.golden"), []byte(old))
	r := f.mustSG(t, dir, 1, "compare", "--suite", f.suite, "--results", f.candRes, "--golden", g, "--junit", "j.xml", "--diff", "d.txt")
	if !strings.Contains(r.stdout, "1 missing") {
		t.Errorf("stdout does not count the missing probe:\n%s", r.stdout)
	}
	requireGateReason(t, readBytes(t, filepath.Join(dir, "j.xml")), readBytes(t, filepath.Join(dir, "d.txt")), "failure", "old-ppl.golden has a golden file but the suite has no such probe")
}

package main_test

import (
	"bytes"
	"fmt"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// detSuiteYAML covers every deterministic probe kind on the fixture data:
// perplexity, choice, generation, drift, flips and sparsity (speed probes
// are the one non-deterministic kind and are left out).
const detSuiteYAML = `format: 1
name: det
probes:
  - name: ppl
    kind: perplexity
    text: data/heldout.txt
    max_bytes: 1500
    window: 128
    stride: 64
    gate:
      perplexity: {rel: 0.03, test: bootstrap, resamples: 1000}
  - name: mc
    kind: choice
    items: data/status.jsonl
    pool: data/pool.jsonl
    shots: 2
    limit: 10
    score: per-byte
    gate:
      accuracy: {abs: 0.1, test: mcnemar}
  - name: gen
    kind: generation
    items: data/status.jsonl
    pool: data/pool.jsonl
    shots: 2
    limit: 6
    max_tokens: 4
    gate:
      exact_match: {abs: 0.1}
  - name: flips
    kind: flips
    gate:
      lost: {abs: 3}
  - name: drift
    kind: drift
    text: data/heldout.txt
    max_bytes: 1200
    window: 128
    stride: 64
    gate:
      kl_mean: {abs: 0.02, rel: 0.25}
  - name: sparsity
    kind: sparsity
    text: data/heldout.txt
    max_bytes: 800
    window: 128
    stride: 64
    gate:
      kept_mlp: {abs: 0.02}
`

// TestDeterminismMatrix runs one suite on a sparse candidate of the demo
// model under --threads 1, 2 and 8, GOMAXPROCS=1 and 2, a repeat of the
// default, and as 3 shards merged; the Results JSON and the verdict JSON of
// every variant (wall times zeroed) must equal the first's byte for byte,
// and so must a binary built with -tags noasm (the pure-Go kernels): 8
// variants, 14 comparisons.
func TestDeterminismMatrix(t *testing.T) {
	f := fixture(t)
	dir := t.TempDir()
	ws := filepath.Join(dir, "s")
	if err := writeSuiteDir(ws, detSuiteYAML); err != nil {
		t.Fatal(err)
	}
	suite := filepath.Join(ws, "suite.yaml")
	g := filepath.Join(dir, "golden")
	run := func(name string, env []string, extra ...string) (res, verdict []byte) {
		t.Helper()
		args := append([]string{"run", "--suite", suite, "--candidate", f.build, "--no-cache", "--golden", g,
			"--results", name + ".json", "--json", name + ".verdict.json"}, extra...)
		if r := f.sg(t, dir, env, args...); r.code != 0 {
			t.Fatalf("%s: exit %d\n%s%s", name, r.code, r.stdout, r.stderr)
		}
		return readBytes(t, filepath.Join(dir, name+".json")), readBytes(t, filepath.Join(dir, name+".verdict.json"))
	}
	// The golden files come from a first run, so every variant gates against them.
	f.mustSG(t, dir, 0, "run", "--suite", suite, "--candidate", f.build, "--no-cache", "--results", "golden-source.json")
	f.mustSG(t, dir, 0, "golden", "update", "--suite", suite, "--golden", g, "--from", "golden-source.json", "--reason", "determinism", "--who", "t")

	type variant struct {
		name       string
		res, vrdct []byte
	}
	var vs []variant
	add := func(name string, res, v []byte) {
		vs = append(vs, variant{name, zeroSecondsJSON(res), zeroSecondsJSON(v)})
	}
	for _, th := range []string{"1", "2", "8"} {
		res, v := run("threads-"+th, nil, "--threads", th)
		add("--threads "+th, res, v)
	}
	for _, p := range []string{"1", "2"} {
		res, v := run("gomaxprocs-"+p, []string{"GOMAXPROCS=" + p})
		add("GOMAXPROCS="+p, res, v)
	}
	res, v := run("repeat", nil)
	add("a second default run", res, v)

	// The pure-Go kernel path: a binary built with -tags noasm. The assembly
	// computes the same ascending chains of rounded products as the Go
	// twins, so the two paths agree to the bit, not just within tolerance.
	noasm := filepath.Join(dir, "sparsegate-noasm")
	build := exec.Command("go", "build", "-tags", "noasm", "-o", noasm, "./cmd/sparsegate")
	build.Dir = "../.."
	if out, err := build.CombinedOutput(); err != nil {
		t.Fatalf("go build -tags noasm: %v\n%s", err, out)
	}
	{
		args := []string{"run", "--suite", suite, "--candidate", f.build, "--no-cache", "--golden", g,
			"--results", "noasm.json", "--json", "noasm.verdict.json"}
		cmd := exec.Command(noasm, args...)
		cmd.Dir = dir
		if out, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("noasm run: %v\n%s", err, out)
		}
		add("the noasm (pure Go) kernels", readBytes(t, filepath.Join(dir, "noasm.json")), readBytes(t, filepath.Join(dir, "noasm.verdict.json")))
	}

	var shards []string
	for i := 1; i <= 3; i++ {
		name := fmt.Sprintf("shard-%d.json", i)
		f.mustSG(t, dir, 0, "run", "--suite", suite, "--candidate", f.build, "--no-cache", "--shard", fmt.Sprintf("%d/3", i), "--results", name)
		shards = append(shards, name)
	}
	f.mustSG(t, dir, 0, append([]string{"merge", "--out", "merged.json"}, shards...)...)
	f.mustSG(t, dir, 0, "compare", "--suite", suite, "--results", "merged.json", "--golden", g, "--json", "merged.verdict.json")
	add("3 shards merged", readBytes(t, filepath.Join(dir, "merged.json")), readBytes(t, filepath.Join(dir, "merged.verdict.json")))

	for _, probe := range []string{`"ppl"`, `"mc"`, `"gen"`, `"flips"`, `"drift"`, `"sparsity"`} {
		if !bytes.Contains(vs[0].res, []byte(`"name": `+probe)) {
			t.Fatalf("the results lack probe %s", probe)
		}
	}
	if bytes.Contains(vs[0].res, []byte(`"status": "skipped"`)) || bytes.Contains(vs[0].res, []byte(`"status": "error"`)) {
		t.Fatalf("a probe did not run, so the matrix would compare less than it claims:\n%s", vs[0].res)
	}
	comparisons := 0
	for _, x := range vs[1:] {
		for _, c := range []struct {
			what       string
			want, have []byte
		}{{"Results JSON", vs[0].res, x.res}, {"verdict JSON", vs[0].vrdct, x.vrdct}} {
			comparisons++
			if !bytes.Equal(c.want, c.have) {
				t.Errorf("%s under %s differs from %s:\n%s", c.what, x.name, vs[0].name, firstDiff(c.want, c.have))
			}
		}
	}
	t.Logf("%d variants, %d byte-for-byte comparisons", len(vs), comparisons)
}

// firstDiff shows the first differing line of two texts.
func firstDiff(a, b []byte) string {
	al, bl := strings.Split(string(a), "\n"), strings.Split(string(b), "\n")
	for i := 0; i < len(al) && i < len(bl); i++ {
		if al[i] != bl[i] {
			return fmt.Sprintf("line %d:\n- %s\n+ %s", i+1, al[i], bl[i])
		}
	}
	return fmt.Sprintf("lengths differ: %d and %d lines", len(al), len(bl))
}

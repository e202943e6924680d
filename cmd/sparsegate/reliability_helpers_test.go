package main_test

// Shared machinery of the reliability tests: the real binary, built once per
// test process, and a fixture workspace (a small suite over the demo model,
// a sparse build, precomputed results and golden files) made once and only
// read by the tests, which copy what they change.

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"sync"
	"syscall"
	"testing"
	"time"
)

// relDemoModel is the demo model in the source tree, relative to this package.
const relDemoModel = "../../suites/demo/model"

// relDemoLayers is the demo model's layer count (its config.json;
// TestRelDemoLayersMatchConfig checks it).
const relDemoLayers = 6

// relSuiteYAML is the fixture suite: a perplexity probe on 1500 bytes and an
// 8-item few-shot choice probe, so a run takes well under a second.
const relSuiteYAML = `format: 1
name: rel
probes:
  - name: ppl
    kind: perplexity
    text: data/heldout.txt
    max_bytes: 1500
    window: 128
    stride: 64
    gate:
      perplexity: {rel: 0.03}
  - name: mc
    kind: choice
    items: data/status.jsonl
    pool: data/pool.jsonl
    shots: 2
    limit: 8
    gate:
      accuracy: {abs: 0.1}
`

// relFixture is the shared, read-only workspace.
type relFixture struct {
	bin      string // the sparsegate binary
	root     string // the workspace directory
	model    string // absolute path of the demo model
	hash     string // SHA-256 of the demo model's weights
	suite    string // the fixture suite file
	build    string // a sparse build (oracle k=96 MLP, k=2 heads) over the demo model
	build2   string // another sparse build (oracle k=192 MLP, k=3 heads)
	baseRes  string // results of the suite on the base alone
	candRes  string // results of the suite on build
	cand2Res string // results of the suite on build2
	golden   string // golden directory recorded from candRes
	verdict  string // verdict JSON of candRes against golden
}

var (
	relOnce sync.Once
	relFix  *relFixture
	relErr  error
	relSkip string
)

// fixture returns the shared workspace, building the binary and the files on
// first use; it skips the test when no go tool is on the PATH.
func fixture(t *testing.T) *relFixture {
	t.Helper()
	relOnce.Do(func() { relFix, relErr = makeFixture() })
	if relSkip != "" {
		t.Skip(relSkip)
	}
	if relErr != nil {
		t.Fatalf("reliability fixture: %v", relErr)
	}
	return relFix
}

// workspacePrefix names the per-process workspace directories; the pid
// follows, so a later run can remove the workspaces of finished runs.
const workspacePrefix = "sparsegate-reliability-"

// removeStaleWorkspaces deletes workspaces left by test processes that no
// longer run (there is no TestMain to clean up after the last test).
func removeStaleWorkspaces() {
	dirs, _ := filepath.Glob(filepath.Join(os.TempDir(), workspacePrefix+"*"))
	for _, d := range dirs {
		pidText, _, _ := strings.Cut(strings.TrimPrefix(filepath.Base(d), workspacePrefix), "-")
		pid, err := strconv.Atoi(pidText)
		if err != nil || pid <= 0 || pid == os.Getpid() {
			continue
		}
		if syscall.Kill(pid, 0) == syscall.ESRCH {
			os.RemoveAll(d)
		}
	}
}

func makeFixture() (*relFixture, error) {
	gotool, err := exec.LookPath("go")
	if err != nil {
		relSkip = fmt.Sprintf("skipping: the go tool is not on the PATH, so the sparsegate binary cannot be built (%v)", err)
		return nil, nil
	}
	removeStaleWorkspaces()
	root, err := os.MkdirTemp("", fmt.Sprintf("%s%d-", workspacePrefix, os.Getpid()))
	if err != nil {
		return nil, err
	}
	f := &relFixture{root: root, bin: filepath.Join(root, "sparsegate")}
	build := exec.Command(gotool, "build", "-o", f.bin, "./cmd/sparsegate")
	build.Dir = "../.."
	if out, err := build.CombinedOutput(); err != nil {
		return nil, fmt.Errorf("go build: %v\n%s", err, out)
	}
	if f.model, err = filepath.Abs(relDemoModel); err != nil {
		return nil, err
	}
	if f.hash, err = fileSHA256(filepath.Join(f.model, "model.safetensors")); err != nil {
		return nil, err
	}
	ws := filepath.Join(root, "ws")
	if err := writeSuiteDir(ws, relSuiteYAML); err != nil {
		return nil, err
	}
	f.suite = filepath.Join(ws, "suite.yaml")
	f.build, f.build2 = filepath.Join(root, "build"), filepath.Join(root, "build2")
	if err := writeManifest(f.build, f.model, f.hash, 96, 2); err != nil {
		return nil, err
	}
	if err := writeManifest(f.build2, f.model, f.hash, 192, 3); err != nil {
		return nil, err
	}
	p := func(name string) string { return filepath.Join(root, name) }
	f.baseRes, f.candRes, f.cand2Res = p("base.json"), p("cand.json"), p("cand2.json")
	f.golden, f.verdict = p("golden"), p("verdict.json")
	steps := [][]string{
		{"run", "--suite", f.suite, "--base", f.model, "--no-cache", "--results", f.baseRes},
		{"run", "--suite", f.suite, "--candidate", f.build, "--no-cache", "--results", f.candRes},
		{"run", "--suite", f.suite, "--candidate", f.build2, "--no-cache", "--results", f.cand2Res},
		{"golden", "update", "--suite", f.suite, "--golden", f.golden, "--from", f.candRes, "--reason", "fixture", "--who", "reliability"},
		{"compare", "--suite", f.suite, "--results", f.candRes, "--golden", f.golden, "--json", f.verdict},
	}
	for _, s := range steps {
		if r := execBin(f.bin, root, nil, s...); r.code != 0 {
			return nil, fmt.Errorf("fixture step %q: exit %d\n%s%s", s, r.code, r.stdout, r.stderr)
		}
	}
	return f, nil
}

// writeSuiteDir writes a suite file and small slices of the demo data
// (data/heldout.txt: 3000 bytes; data/status.jsonl: 12 items;
// data/pool.jsonl: 20 solved examples) into dir.
func writeSuiteDir(dir, yaml string) error {
	src := "../../suites/demo/data"
	data := filepath.Join(dir, "data")
	if err := os.MkdirAll(data, 0o755); err != nil {
		return err
	}
	cut := func(path string, maxBytes, maxLines int) ([]byte, error) {
		b, err := os.ReadFile(path)
		if err != nil {
			return nil, err
		}
		var out []byte
		for i, line := range bytes.SplitAfter(b, []byte("\n")) {
			if i >= maxLines || len(out)+len(line) > maxBytes {
				break
			}
			out = append(out, line...)
		}
		return out, nil
	}
	for name, spec := range map[string]struct {
		src          string
		bytes, lines int
	}{
		"heldout.txt":  {filepath.Join(src, "heldout.txt"), 3000, 1 << 30},
		"status.jsonl": {filepath.Join(src, "items", "status.jsonl"), 1 << 30, 12},
		"pool.jsonl":   {filepath.Join(src, "pools", "status.jsonl"), 1 << 30, 20},
	} {
		b, err := cut(spec.src, spec.bytes, spec.lines)
		if err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(data, name), b, 0o644); err != nil {
			return err
		}
	}
	return os.WriteFile(filepath.Join(dir, "suite.yaml"), []byte(yaml), 0o644)
}

// writeManifest writes a sparse build of the demo model with oracle
// rules (mlpK neurons, headK heads in every layer).
func writeManifest(dir, base, hash string, mlpK, headK int) error {
	var layers []string
	for l := range relDemoLayers {
		layers = append(layers, fmt.Sprintf(`{"layer":%d,"mlp":{"mode":"oracle","k":%d},"attention":{"mode":"oracle","k":%d}}`, l, mlpK, headK))
	}
	return writeRawManifest(dir, base, hash, "", strings.Join(layers, ",\n"))
}

// writeRawManifest writes manifest.json with the given base, predictors
// field (omitted when "") and layer entries.
func writeRawManifest(dir, base, hash, predictors, layers string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	pred := ""
	if predictors != "" {
		pred = fmt.Sprintf(`"predictors": %q,`, predictors)
	}
	m := fmt.Sprintf("{\"format\": \"sparsegate-build\", \"version\": 1,\n\"base\": {\"path\": %q, \"sha256\": %q}, %s\n\"layers\": [\n%s]}\n", base, hash, pred, layers)
	return os.WriteFile(filepath.Join(dir, "manifest.json"), []byte(m), 0o644)
}

// relResult is how one run of the binary ended.
type relResult struct {
	code           int
	stdout, stderr string
	maxRSSKiB      int64
}

// childEnv is the environment of every child: the test's own, less the
// variables that steer sharding and approval, with the user cache pointed
// into the workspace so no run writes outside it.
func childEnv(cacheRoot string, extra []string) []string {
	drop := map[string]bool{"SPARSEGATE_SHARD_INDEX": true, "SPARSEGATE_SHARD_COUNT": true, "JOB_COMPLETION_INDEX": true,
		"CI_NODE_INDEX": true, "CI_NODE_TOTAL": true, "CIRCLE_NODE_INDEX": true, "CIRCLE_NODE_TOTAL": true,
		"BUILDKITE_PARALLEL_JOB": true, "BUILDKITE_PARALLEL_JOB_COUNT": true, "SPARSEGATE_APPROVER": true, "XDG_CACHE_HOME": true}
	var env []string
	for _, kv := range os.Environ() {
		if k, _, _ := strings.Cut(kv, "="); !drop[k] {
			env = append(env, kv)
		}
	}
	env = append(env, "XDG_CACHE_HOME="+filepath.Join(cacheRoot, ".cache"))
	return append(env, extra...)
}

// execBin runs the binary in dir with extra environment variables.
func execBin(bin, dir string, env []string, args ...string) relResult {
	cmd := exec.Command(bin, args...)
	cmd.Dir = dir
	cmd.Env = childEnv(dir, env)
	var out, errb bytes.Buffer
	cmd.Stdout, cmd.Stderr = &out, &errb
	err := cmd.Run()
	r := relResult{stdout: out.String(), stderr: errb.String(), code: -1}
	var ee *exec.ExitError
	switch {
	case err == nil:
		r.code = 0
	case errors.As(err, &ee):
		r.code = ee.ExitCode()
	default:
		r.stderr += "\n(exec: " + err.Error() + ")"
	}
	if cmd.ProcessState != nil {
		if ru, ok := cmd.ProcessState.SysUsage().(*syscall.Rusage); ok {
			r.maxRSSKiB = ru.Maxrss // kilobytes on Linux (getrusage(2))
		}
	}
	return r
}

// sg runs the binary in dir, failing the test if it cannot start.
func (f *relFixture) sg(t *testing.T, dir string, env []string, args ...string) relResult {
	t.Helper()
	r := execBin(f.bin, dir, env, args...)
	if r.code < 0 {
		t.Fatalf("sparsegate %q did not run: %s", args, r.stderr)
	}
	return r
}

// mustSG runs the binary and requires the exit code want.
func (f *relFixture) mustSG(t *testing.T, dir string, want int, args ...string) relResult {
	t.Helper()
	r := f.sg(t, dir, nil, args...)
	if r.code != want {
		t.Fatalf("sparsegate %q: exit %d, want %d\nstdout:\n%s\nstderr:\n%s", args, r.code, want, r.stdout, r.stderr)
	}
	return r
}

// fileSHA256 returns the hex SHA-256 of a file's bytes.
func fileSHA256(path string) (string, error) {
	b, err := os.ReadFile(path)
	if err != nil {
		return "", err
	}
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:]), nil
}

// snapshot describes every entry under root: regular files by size and
// SHA-256, symbolic links by target, others by type. Two snapshots are equal
// when nothing under root was created, removed or changed.
func snapshot(t *testing.T, root string) map[string]string {
	t.Helper()
	out := map[string]string{}
	err := filepath.WalkDir(root, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(root, path)
		switch {
		case d.Type()&fs.ModeSymlink != 0:
			target, err := os.Readlink(path)
			if err != nil {
				return err
			}
			out[rel] = "link " + target
		case d.Type().IsRegular():
			info, err := d.Info()
			if err != nil {
				return err
			}
			if info.Size() > 64<<20 {
				out[rel] = fmt.Sprintf("big %d %v", info.Size(), info.ModTime().UnixNano())
				return nil
			}
			h, err := fileSHA256(path)
			if err != nil {
				return err
			}
			out[rel] = fmt.Sprintf("file %d %s", info.Size(), h)
		default:
			out[rel] = d.Type().String()
		}
		return nil
	})
	if err != nil {
		t.Fatalf("snapshot of %s: %v", root, err)
	}
	return out
}

// diffSnapshots lists what changed between two snapshots.
func diffSnapshots(before, after map[string]string) []string {
	var d []string
	for k, v := range after {
		if b, ok := before[k]; !ok {
			d = append(d, "created "+k)
		} else if b != v {
			d = append(d, "changed "+k)
		}
	}
	for k := range before {
		if _, ok := after[k]; !ok {
			d = append(d, "removed "+k)
		}
	}
	return d
}

// copyTree copies a directory tree (files, directories and symbolic links).
func copyTree(t *testing.T, src, dst string) {
	t.Helper()
	err := filepath.WalkDir(src, func(path string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, path)
		to := filepath.Join(dst, rel)
		switch {
		case d.IsDir():
			return os.MkdirAll(to, 0o755)
		case d.Type()&fs.ModeSymlink != 0:
			target, err := os.Readlink(path)
			if err != nil {
				return err
			}
			return os.Symlink(target, to)
		default:
			b, err := os.ReadFile(path)
			if err != nil {
				return err
			}
			return os.WriteFile(to, b, 0o644)
		}
	})
	if err != nil {
		t.Fatalf("copying %s: %v", src, err)
	}
}

// secondsField matches the wall-time fields of Results and verdict JSON.
var secondsField = regexp.MustCompile(`"seconds": [-+0-9.eE]+`)

// zeroSecondsJSON blanks the wall times of indented Results or verdict JSON,
// leaving every other byte as written.
func zeroSecondsJSON(b []byte) []byte { return secondsField.ReplaceAll(b, []byte(`"seconds": 0`)) }

// readBytes reads a file the test expects to exist.
func readBytes(t *testing.T, path string) []byte {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// waitTimeout is how long a child may take before a test gives up on it.
const waitTimeout = 60 * time.Second

// The reliability fixtures' manifests list relDemoLayers layers; a
// retrained demo model with another depth must change the constant with it.
func TestRelDemoLayersMatchConfig(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join(relDemoModel, "config.json"))
	if err != nil {
		t.Fatal(err)
	}
	var cfg struct {
		Layers int `json:"num_hidden_layers"`
	}
	if err := json.Unmarshal(raw, &cfg); err != nil {
		t.Fatal(err)
	}
	if cfg.Layers != relDemoLayers {
		t.Fatalf("demo config.json has %d layers, relDemoLayers is %d", cfg.Layers, relDemoLayers)
	}
}

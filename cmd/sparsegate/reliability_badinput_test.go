package main_test

import (
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"golang.org/x/sys/unix"
)

// knownBugsEnv, when set, runs the cases skipped as known bugs (to check a
// fix): SPARSEGATE_TEST_KNOWN_BUGS=1 go test ./cmd/sparsegate -run Reliab
const knownBugsEnv = "SPARSEGATE_TEST_KNOWN_BUGS"

// TestBadInputCatalogue runs the real binary on every case of badCases and
// checks the exit code, the message and that nothing under the case's
// directory was written (outputs absent, inputs and golden files unchanged),
// apart from the outputs a case expects to create.
func TestBadInputCatalogue(t *testing.T) {
	f := fixture(t)
	cases := badCases()
	if len(cases) < 40 {
		t.Fatalf("the catalogue has %d cases, want at least 40", len(cases))
	}
	seen := map[string]bool{}
	for _, c := range cases {
		if seen[c.id] {
			t.Fatalf("case id %q appears twice", c.id)
		}
		seen[c.id] = true
		t.Run(c.id, func(t *testing.T) {
			if c.skip != "" && os.Getenv(knownBugsEnv) == "" {
				t.Skip(c.skip)
			}
			dir := t.TempDir()
			if c.skipIf != nil {
				if why := c.skipIf(t, dir); why != "" {
					t.Skip(why)
				}
			}
			args := c.setup(t, f, dir)
			before := snapshot(t, dir)
			r := f.sg(t, dir, c.env, args...)
			t.Logf("sparsegate %s: exit %d: %s", strings.Join(args, " "), r.code, strings.TrimSpace(r.stderr))
			if (c.code == anyNonZero && r.code == 0) || (c.code != anyNonZero && r.code != c.code) {
				t.Errorf("exit %d, want %s\nstdout:\n%s\nstderr:\n%s", r.code, codeText(c.code), r.stdout, r.stderr)
			}
			for _, m := range c.msgs {
				if !strings.Contains(r.stderr, m) {
					t.Errorf("stderr lacks %q:\n%s", m, r.stderr)
				}
			}
			for _, m := range c.out {
				if !strings.Contains(r.stdout, m) {
					t.Errorf("stdout lacks %q:\n%s", m, r.stdout)
				}
			}
			for _, bad := range []string{"internal fault", "panic:", "goroutine ", "fatal error"} {
				if strings.Contains(r.stderr, bad) {
					t.Errorf("stderr shows a crash (%q):\n%s", bad, r.stderr)
				}
			}
			for _, p := range c.absent {
				if _, err := os.Lstat(filepath.Join(dir, p)); err == nil {
					t.Errorf("%s was written", p)
				}
			}
			allowed := map[string]bool{}
			for _, p := range c.created {
				allowed["created "+filepath.FromSlash(p)] = true
				if _, err := os.Stat(filepath.Join(dir, p)); err != nil {
					t.Errorf("%s was not created: %v", p, err)
				}
			}
			for _, d := range diffSnapshots(before, snapshot(t, dir)) {
				if !allowed[d] {
					t.Errorf("the command %s (only %q may be created)", d, c.created)
				}
			}
			if c.maxRSSMiB > 0 && r.maxRSSKiB > c.maxRSSMiB<<10 {
				t.Errorf("peak memory %d KiB, want at most %d MiB", r.maxRSSKiB, c.maxRSSMiB)
			}
		})
	}
}

func codeText(code int) string {
	if code == anyNonZero {
		return "non-zero"
	}
	return fmt.Sprint(code)
}

// docRow matches a case row of BAD_INPUTS.md: | `id` | input | command | code | message |
var docRow = regexp.MustCompile("(?m)^\\| `([a-zA-Z0-9-]+)` \\|[^|]*\\|[^|]*\\| ([0-9]+|non-zero) \\|")

// TestBadInputsDocumented keeps BAD_INPUTS.md and the catalogue in step:
// every case has one row with its exit code, and every row is a case.
func TestBadInputsDocumented(t *testing.T) {
	doc, err := os.ReadFile("BAD_INPUTS.md")
	if err != nil {
		t.Fatal(err)
	}
	rows := map[string]string{}
	for _, m := range docRow.FindAllStringSubmatch(string(doc), -1) {
		if _, dup := rows[m[1]]; dup {
			t.Errorf("BAD_INPUTS.md lists %s twice", m[1])
		}
		rows[m[1]] = m[2]
	}
	for _, c := range badCases() {
		code, ok := rows[c.id]
		switch {
		case !ok:
			t.Errorf("BAD_INPUTS.md has no row for case %s", c.id)
		case code != codeText(c.code):
			t.Errorf("BAD_INPUTS.md gives exit %s for %s, the test expects %s", code, c.id, codeText(c.code))
		}
		delete(rows, c.id)
	}
	for id := range rows {
		t.Errorf("BAD_INPUTS.md documents %s, which is not a case", id)
	}
}

// twoFileTokenizer replaces a checkpoint's tokenizer.json with vocab.json +
// merges.txt holding the same vocabulary and merges, except that the second
// merge (line 3, after the "#version" line) starts with the symbol bad.
func twoFileTokenizer(t *testing.T, dir, bad string) {
	t.Helper()
	var tj struct {
		Model struct {
			Vocab  map[string]int    `json:"vocab"`
			Merges []json.RawMessage `json:"merges"`
		} `json:"model"`
	}
	if err := json.Unmarshal(readBytes(t, filepath.Join(dir, "tokenizer.json")), &tj); err != nil {
		t.Fatal(err)
	}
	vocab, err := json.Marshal(tj.Model.Vocab)
	if err != nil {
		t.Fatal(err)
	}
	var merges strings.Builder
	merges.WriteString("#version: 0.2\n")
	for i, raw := range tj.Model.Merges {
		var pair []string
		if err := json.Unmarshal(raw, &pair); err != nil {
			var s string
			if err := json.Unmarshal(raw, &s); err != nil {
				t.Fatal(err)
			}
			a, b, _ := strings.Cut(s, " ")
			pair = []string{a, b}
		}
		if i == 1 {
			pair[0] = bad
		}
		merges.WriteString(pair[0] + " " + pair[1] + "\n")
	}
	writeFile(t, filepath.Join(dir, "vocab.json"), vocab)
	writeFile(t, filepath.Join(dir, "merges.txt"), []byte(merges.String()))
	if err := os.Remove(filepath.Join(dir, "tokenizer.json")); err != nil {
		t.Fatal(err)
	}
}

// readOnlyIsWritable returns a reason to skip when a directory of mode 0555
// is still writable here (as root), so a read-only golden directory cannot
// make an update fail.
func readOnlyIsWritable(t *testing.T, _ string) string {
	probe := filepath.Join(t.TempDir(), "ro")
	if err := os.Mkdir(probe, 0o555); err != nil {
		t.Fatal(err)
	}
	defer os.Chmod(probe, 0o755)
	if err := os.WriteFile(filepath.Join(probe, "x"), nil, 0o644); err == nil {
		return "skipping: a mode-0555 directory is writable here (running as root), so a read-only golden directory cannot be simulated"
	}
	return ""
}

// fullDevice returns a path that behaves like /dev/full (writes fail with
// ENOSPC): a private character device 1,7 in dir when this process may
// create one (as root), else /dev/full itself when /dev is not writable (so
// a writer that replaces its target cannot harm it). Otherwise it skips.
func fullDevice(t *testing.T, dir string) string {
	t.Helper()
	p := filepath.Join(dir, "full")
	if err := unix.Mknod(p, unix.S_IFCHR|0o666, int(unix.Mkdev(1, 7))); err == nil {
		return "full"
	}
	if unix.Access("/dev", unix.W_OK) != nil {
		return "/dev/full"
	}
	t.Skip("skipping: cannot make a private full device, and /dev is writable here, so /dev/full itself is not safe to write to")
	return ""
}

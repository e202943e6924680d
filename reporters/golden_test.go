package reporters

import (
	"bytes"
	"flag"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/sergi/go-diff/diffmatchpatch"

	"sparsegate/golden"
)

var update = flag.Bool("update", false, "rewrite the expected outputs under testdata/ that differ")

// reporterCases are every reporter with the extension of its golden files.
var reporterCases = []struct {
	name string
	r    Reporter
}{
	{"junit.xml", JUnit{}},
	{"diff.txt", Diff{}},
	{"diff-color.txt", Diff{Color: true, MaxItems: 2}},
	{"verdict.json", JSON{}},
	{"summary.md", Markdown{}},
	{"report.html", HTML{}},
}

// verdictCases are the hand-built verdicts of the golden tests.
var verdictCases = []struct {
	name string
	v    func() *golden.Verdict
}{
	{"fail", failingVerdict},
	{"pass", passingVerdict},
}

// render runs r on v into a buffer.
func render(t *testing.T, r Reporter, v *golden.Verdict) []byte {
	t.Helper()
	var buf bytes.Buffer
	if err := r.Report(&buf, v); err != nil {
		t.Fatalf("%T: %v", r, err)
	}
	return buf.Bytes()
}

// checkGolden compares have with testdata/name, rewriting the file when it
// differs and -update is set.
func checkGolden(t *testing.T, name string, have []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	want, err := os.ReadFile(path)
	if err == nil && bytes.Equal(have, want) {
		return
	}
	if *update {
		if err := os.WriteFile(path, have, 0o644); err != nil {
			t.Fatal(err)
		}
		t.Logf("rewrote %s", path)
		return
	}
	if err != nil {
		t.Fatalf("%v (run go test ./reporters -update to create it)", err)
	}
	t.Errorf("%s differs (-want +have; run go test ./reporters -update after checking):\n%s", path, unifiedDiff(string(want), string(have)))
}

// unifiedDiff is a line diff of want and have: changed lines with -/+ and up
// to two lines of context around them.
func unifiedDiff(want, have string) string {
	dmp := diffmatchpatch.New()
	dmp.DiffTimeout = 0
	a, b, lines := dmp.DiffLinesToChars(want, have)
	diffs := dmp.DiffCharsToLines(dmp.DiffMain(a, b, false), lines)
	var out strings.Builder
	for _, d := range diffs {
		ls := strings.SplitAfter(d.Text, "\n")
		if ls[len(ls)-1] == "" {
			ls = ls[:len(ls)-1]
		}
		switch d.Type {
		case diffmatchpatch.DiffDelete:
			for _, l := range ls {
				out.WriteString("-" + l)
			}
		case diffmatchpatch.DiffInsert:
			for _, l := range ls {
				out.WriteString("+" + l)
			}
		default:
			if len(ls) > 4 {
				ls = append(append(ls[:2:2], "…\n"), ls[len(ls)-2:]...)
			}
			for _, l := range ls {
				out.WriteString(" " + l)
			}
		}
	}
	return out.String()
}

func TestGoldenFiles(t *testing.T) {
	for _, vc := range verdictCases {
		for _, rc := range reporterCases {
			t.Run(vc.name+"."+rc.name, func(t *testing.T) {
				checkGolden(t, vc.name+"."+rc.name, render(t, rc.r, vc.v()))
			})
		}
	}
}

func TestDeterministic(t *testing.T) {
	for _, rc := range reporterCases {
		a := render(t, rc.r, failingVerdict())
		b := render(t, rc.r, failingVerdict())
		if !bytes.Equal(a, b) {
			t.Errorf("%s: two renderings of the same verdict differ:\n%s", rc.name, unifiedDiff(string(a), string(b)))
		}
	}
}

// oneByteWriter takes what it is given one byte at a time and counts the
// Write calls, to show that output does not depend on how the writer
// buffers.
type oneByteWriter struct {
	data  []byte
	calls int
}

func (w *oneByteWriter) Write(p []byte) (int, error) {
	w.calls++
	for _, c := range p {
		w.data = append(w.data, c)
	}
	return len(p), nil
}

func TestChunkingDoesNotMatter(t *testing.T) {
	for _, rc := range reporterCases {
		want := render(t, rc.r, failingVerdict())
		w := &oneByteWriter{}
		if err := rc.r.Report(w, failingVerdict()); err != nil {
			t.Fatalf("%s: %v", rc.name, err)
		}
		if !bytes.Equal(w.data, want) {
			t.Errorf("%s: output through a one-byte writer differs from a bytes.Buffer", rc.name)
		}
		if w.calls == 0 {
			t.Errorf("%s: no Write calls", rc.name)
		}
	}
}

// failAfter accepts n bytes, then fails every write.
type failAfter struct{ n int }

var errDiskFull = &os.PathError{Op: "write", Path: "report", Err: os.ErrClosed}

func (w *failAfter) Write(p []byte) (int, error) {
	if len(p) > w.n {
		k := w.n
		w.n = 0
		return k, errDiskFull
	}
	w.n -= len(p)
	return len(p), nil
}

func TestWriterErrorsAreReturned(t *testing.T) {
	for _, rc := range reporterCases {
		for _, n := range []int{0, 100} {
			err := rc.r.Report(&failAfter{n: n}, failingVerdict())
			if err == nil {
				t.Errorf("%s: writer failing after %d bytes: no error", rc.name, n)
			} else if !strings.Contains(err.Error(), errDiskFull.Error()) {
				t.Errorf("%s: error %q does not wrap the writer's error", rc.name, err)
			}
		}
	}
}

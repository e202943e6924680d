package reporters

import (
	"bytes"
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"

	"sparsegate/golden"
)

func TestWriteFileCreatesParent(t *testing.T) {
	path := filepath.Join(t.TempDir(), "reports", "ci", "junit.xml")
	if err := WriteFile(path, JUnit{}, failingVerdict()); err != nil {
		t.Fatal(err)
	}
	got, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(got, render(t, JUnit{}, failingVerdict())) {
		t.Error("file content differs from the reporter's output")
	}
}

// halfway writes part of a report, then fails.
type halfway struct{}

var errHalfway = errors.New("renderer gave up")

func (halfway) Report(w io.Writer, v *golden.Verdict) error {
	if _, err := w.Write(bytes.Repeat([]byte("partial report\n"), 100000)); err != nil {
		return err
	}
	return errHalfway
}

func TestWriteFileLeavesNothingOnError(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "out", "report.html")
	err := WriteFile(path, halfway{}, failingVerdict())
	if !errors.Is(err, errHalfway) {
		t.Fatalf("error %v, want the reporter's error wrapped", err)
	}
	if _, err := os.Stat(path); !os.IsNotExist(err) {
		t.Errorf("target exists after a failed write: %v", err)
	}
	entries, err := os.ReadDir(filepath.Dir(path))
	if err != nil {
		t.Fatal(err)
	}
	for _, e := range entries {
		t.Errorf("left behind: %s", e.Name())
	}
}

func TestWriteFileKeepsOldFileOnError(t *testing.T) {
	path := filepath.Join(t.TempDir(), "summary.md")
	if err := WriteFile(path, Markdown{}, passingVerdict()); err != nil {
		t.Fatal(err)
	}
	old, _ := os.ReadFile(path)
	if err := WriteFile(path, halfway{}, failingVerdict()); err == nil {
		t.Fatal("no error")
	}
	now, _ := os.ReadFile(path)
	if !bytes.Equal(old, now) {
		t.Error("a failed write changed the existing file")
	}
}

func TestWriteFileParentIsAFile(t *testing.T) {
	dir := t.TempDir()
	blocker := filepath.Join(dir, "reports")
	if err := os.WriteFile(blocker, nil, 0o644); err != nil {
		t.Fatal(err)
	}
	err := WriteFile(filepath.Join(blocker, "junit.xml"), JUnit{}, failingVerdict())
	if err == nil {
		t.Fatal("writing under a regular file succeeded")
	}
	if !bytes.Contains([]byte(err.Error()), []byte(blocker)) {
		t.Errorf("error %q does not name the path", err)
	}
}

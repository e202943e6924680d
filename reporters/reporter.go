package reporters

import (
	"fmt"
	"io"
	"os"
	"path/filepath"

	"sparsegate/golden"
	"sparsegate/harness/atomicfile"
)

// A Reporter renders a verdict to a writer.
type Reporter interface {
	Report(w io.Writer, v *golden.Verdict) error
}

// WriteFile renders v with r into path atomically: the output goes to a
// temporary file beside path, is synced and renamed over path, so readers see
// the old file or the complete new one, never a half-written one; on error
// the temporary file is removed and path is left as it was. WriteFile creates
// the parent directory (and its parents, mode 0755) when it is missing.
func WriteFile(path string, r Reporter, v *golden.Verdict) error {
	if dir := filepath.Dir(path); dir != "" {
		if err := os.MkdirAll(dir, 0o755); err != nil {
			return fmt.Errorf("report %s: creating its directory: %w", path, err)
		}
	}
	if err := atomicfile.Write(path, func(w io.Writer) error { return r.Report(w, v) }); err != nil {
		return fmt.Errorf("report %s: %w", path, err)
	}
	return nil
}

// ColorFor reports whether to colour output written to f: only when f is a
// terminal, the NO_COLOR environment variable is unset or empty, and TERM is
// not "dumb". getenv looks up the environment (os.Getenv in production; tests
// pass a fake).
func ColorFor(f *os.File, getenv func(string) string) bool {
	if f == nil || getenv("NO_COLOR") != "" || getenv("TERM") == "dumb" {
		return false
	}
	return isTerminal(f)
}

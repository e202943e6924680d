package reporters

import (
	"os"
	"path/filepath"
	"testing"

	"golang.org/x/sys/unix"
)

// env fakes an environment lookup.
func env(kv map[string]string) func(string) string {
	return func(k string) string { return kv[k] }
}

// openPTY opens the master side of a new pseudo-terminal, a terminal that
// needs no controlling tty.
func openPTY(t *testing.T) *os.File {
	t.Helper()
	f, err := os.OpenFile("/dev/ptmx", os.O_RDWR|unix.O_NOCTTY, 0)
	if err != nil {
		t.Skipf("no pseudo-terminal: %v", err)
	}
	t.Cleanup(func() { f.Close() })
	if err := unix.IoctlSetPointerInt(int(f.Fd()), unix.TIOCSPTLCK, 0); err != nil {
		t.Skipf("unlocking the pseudo-terminal: %v", err)
	}
	return f
}

func TestColorFor(t *testing.T) {
	pty := openPTY(t)
	file, err := os.Create(filepath.Join(t.TempDir(), "out.txt"))
	if err != nil {
		t.Fatal(err)
	}
	defer file.Close()
	for _, tc := range []struct {
		name string
		f    *os.File
		env  map[string]string
		want bool
	}{
		{"terminal", pty, map[string]string{"TERM": "xterm-256color"}, true},
		{"terminal, no TERM", pty, nil, true},
		{"terminal, NO_COLOR empty", pty, map[string]string{"NO_COLOR": ""}, true},
		{"terminal, NO_COLOR set", pty, map[string]string{"NO_COLOR": "1"}, false},
		{"terminal, TERM dumb", pty, map[string]string{"TERM": "dumb"}, false},
		{"regular file", file, map[string]string{"TERM": "xterm"}, false},
		{"nil file", nil, nil, false},
	} {
		if got := ColorFor(tc.f, env(tc.env)); got != tc.want {
			t.Errorf("%s: ColorFor = %v, want %v", tc.name, got, tc.want)
		}
	}
}

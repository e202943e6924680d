//go:build darwin || dragonfly || freebsd || netbsd || openbsd

package reporters

import (
	"os"

	"golang.org/x/sys/unix"
)

// isTerminal reports whether f is a terminal: the terminal-attributes ioctl
// succeeds only on one.
func isTerminal(f *os.File) bool {
	_, err := unix.IoctlGetTermios(int(f.Fd()), unix.TIOCGETA)
	return err == nil
}

//go:build !linux && !darwin && !dragonfly && !freebsd && !netbsd && !openbsd

package reporters

import "os"

// isTerminal reports false: on this system sparsegate does not detect
// terminals, so output is never coloured.
func isTerminal(*os.File) bool { return false }

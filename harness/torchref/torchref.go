// Package torchref locates the PyTorch reference the numerical cross-checks
// compare against: Debian's python3-torch, run by the system interpreter, and
// the independent forward pass in harness/engine/testdata/torchref. It is
// test support; the harness never needs Python at run time.
package torchref

import (
	"fmt"
	"os"
	"os/exec"
	"testing"
)

// Python is the interpreter the reference runs under (Debian's, not another
// one first on PATH).
const Python = "/usr/bin/python3"

// Require skips t when torch is not importable, or fails it when
// SPARSEGATE_REQUIRE_REFERENCE=1 (set by .ci/run), so the check cannot
// silently vanish in CI.
func Require(t testing.TB) {
	t.Helper()
	err := exec.Command(Python, "-c", "import torch, numpy").Run()
	if err == nil {
		return
	}
	msg := fmt.Sprintf("PyTorch reference unavailable (%s -c 'import torch': %v); install it with: apt-get install python3-torch python3-numpy", Python, err)
	if os.Getenv("SPARSEGATE_REQUIRE_REFERENCE") == "1" {
		t.Fatal(msg)
	}
	t.Skip(msg)
}

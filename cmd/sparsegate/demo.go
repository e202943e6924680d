package main

import (
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/suites/demo"
)

// demoName is how output names the embedded demo model.
const demoName = "(embedded demo model)"

// demoWindow is the window the demo model was trained on: its positions
// beyond it were never trained, so scores there mean nothing.
const demoWindow = 256

// extractDemo writes the embedded demo files into a temporary directory and
// returns it with its clean-up. Commands load the model from there through
// the ordinary checkpoint path.
func extractDemo() (string, func(), error) {
	tmp, err := os.MkdirTemp("", "sparsegate-demo-")
	if err != nil {
		return "", nil, fmt.Errorf("making a directory for the demo model: %w", err)
	}
	cleanup := func() { os.RemoveAll(tmp) }
	if _, err := demo.Extract(tmp); err != nil {
		cleanup()
		return "", nil, err
	}
	return tmp, cleanup, nil
}

// demoModelDir is extractDemo's model directory.
func demoModelDir(root string) string { return filepath.Join(root, "model") }

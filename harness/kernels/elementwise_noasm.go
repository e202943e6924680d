//go:build !amd64 || noasm

package kernels

// reluBlocks is reluGo.
func reluBlocks(x []float32) { reluGo(x) }

// scaleBlocks is scaleGo.
func scaleBlocks(alpha float32, x []float32) { scaleGo(alpha, x) }

//go:build !amd64 || noasm

package kernels

// expectedGEMVKernel is the name gemvKernel must give without assembly.
func expectedGEMVKernel(DType) string { return "go 8-row" }

//go:build amd64 && !noasm

package kernels

// expectedGEMVKernel is the name gemvKernel must give on this CPU.
func expectedGEMVKernel(dt DType) string {
	switch {
	case !gemvAsm(dt):
		return "go 8-row"
	case dt == F16 && hasAVX512:
		return "avx2 8-row, avx-512 32-row groups"
	}
	return "avx2 8-row"
}

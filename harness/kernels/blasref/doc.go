// Package blasref calls OpenBLAS's cblas_sgemm so that benchmarks can set the
// project's GEMM beside it on the same inputs. It is benchmark support only:
// nothing in the product imports it, and without the build tag `openblas`
// (and cgo) the package is empty.
//
// Build and run it with Debian's libopenblas-dev installed:
//
//	go test -tags openblas -run . -bench GemmVsOpenBLAS ./harness/kernels/blasref
package blasref

//go:build openblas && cgo

package blasref

/*
#cgo pkg-config: openblas
#include <cblas.h>
*/
import "C"

import "unsafe"

// Sgemm computes C = A·B with cblas_sgemm (row-major, no transposes,
// alpha 1, beta 0): A is m×k, B is k×n and C is m×n, all float32 row-major;
// c is overwritten. Lengths that disagree with the shape panic.
func Sgemm(c, a, b []float32, m, k, n int) {
	if m < 0 || k < 0 || n < 0 {
		panic("blasref: negative GEMM dimension")
	}
	if len(a) != m*k || len(b) != k*n || len(c) != m*n {
		panic("blasref: GEMM operand length disagrees with the shape")
	}
	if m == 0 || n == 0 {
		return
	}
	if k == 0 {
		clear(c)
		return
	}
	C.cblas_sgemm(C.CblasRowMajor, C.CblasNoTrans, C.CblasNoTrans,
		C.blasint(m), C.blasint(n), C.blasint(k),
		1, (*C.float)(unsafe.Pointer(&a[0])), C.blasint(k),
		(*C.float)(unsafe.Pointer(&b[0])), C.blasint(n),
		0, (*C.float)(unsafe.Pointer(&c[0])), C.blasint(n))
}

// SetThreads sets the number of threads OpenBLAS uses for every later call
// in this process (openblas_set_num_threads; the setting lives inside the
// library, not in this package).
func SetThreads(n int) { C.openblas_set_num_threads(C.int(n)) }

// Threads returns the number of threads OpenBLAS will use
// (openblas_get_num_threads).
func Threads() int { return int(C.openblas_get_num_threads()) }

// Config returns OpenBLAS's build description (openblas_get_config): its
// version, the kernel chosen for this CPU and its threading.
func Config() string { return C.GoString(C.openblas_get_config()) }

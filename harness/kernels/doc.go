// Package kernels holds the numeric kernels of the CPU inference engine:
// matrix products over weights kept in their stored precision (F32, F16,
// BF16), half-precision conversions, and the vector operations a transformer
// layer needs (normalisations, activations, softmax, rotary embeddings).
//
// Everything computes in float32 unless a function says otherwise.
//
// # Determinism contract
//
// Every output element of [Linear], [Gemm] and [LinearGather] is computed as
// one float32 accumulator that starts at 0 and adds the products x[k]·w[k]
// for k = 0, 1, 2, … in ascending order. Each product is rounded to float32
// before it is added (multiply, then add: two roundings, never a fused
// multiply-add in the pure-Go path; the code writes float32(a*b) so that the
// compiler may not fuse). The bias, when given, is added last. [LinearScatterIn]
// does the same over ascending r, bias last. The float64 helpers (norm
// statistics, activations) use explicit conversions the same way, so a
// build that may fuse (GOAMD64=v3, arm64) gives the same bits as one that
// cannot.
//
// Therefore results are bit-identical for any thread count, any number of
// rows m (a row computed inside a 512-row product equals the same row
// computed alone), either weight layout, and any tiling. Parallelism only
// splits output tiles across goroutines, with a fixed chunking that depends
// on the problem size and never on the thread count; the k reduction is never
// split. The m == 1 (decode) path streams the weights instead of packing them
// but follows the same per-element order, so it agrees with the blocked path
// bit for bit.
//
// # Seams for assembly
//
// The hot inner loops (the GEMM micro-kernel, the dot and axpy loops, the
// half-to-float32 slice conversions) live in micro_generic.go behind small
// unexported functions, so that an assembly file plus build-tagged stubs can
// replace them later without touching the drivers.
//
// # Errors
//
// Bad arguments (wrong lengths, shapes that disagree, indices out of range)
// are programming errors: the kernels panic with a constant message that
// starts with "kernels: ".
package kernels

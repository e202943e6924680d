package kernels

// GEMVKernel exposes gemvKernel to the external tests and benchmarks.
var GEMVKernel = gemvKernel

// Package checkpoint reads and writes model checkpoints.
//
// # Weights
//
// Weights are stored in the safetensors format (see "the safetensors format
// specification"): an 8-byte little-endian unsigned header length N, then N
// bytes of UTF-8 JSON describing every tensor (dtype, shape and
// data_offsets relative to the start of the byte buffer) plus an optional
// "__metadata__" object of string values, then the byte buffer itself.
//
// Open memory-maps one file read-only and validates its header strictly:
// unknown dtypes, duplicate names, shape/size mismatches, overlapping spans
// and holes in the buffer are all refused, with an error that names the file
// and the tensor. Tensor data are views into the mapping and stay valid until
// the owning File (or Weights) is closed; they must never be written to.
//
// OpenWeights opens a checkpoint directory holding either one
// model.safetensors or the shards listed by model.safetensors.index.json,
// and cross-checks the index against the shards.
//
// Write and WriteSharded produce files in the same format atomically: the
// data go to a temporary file in the target directory that is synced and
// then renamed over the target, so a failed write never leaves a
// half-written file behind.
package checkpoint

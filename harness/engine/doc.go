// Package engine runs decoder-only transformer checkpoints on the CPU: the
// forward pass with a key/value cache for the OPT, GPT-2 and Llama families,
// batched prefill of several sequences, per-position log-probabilities,
// continuation log-likelihoods, sliding-window scoring of long texts, greedy
// generation with stop sequences, and a per-layer hook through which a caller
// restricts, token by token, which MLP neurons and attention heads run.
//
// # Weights
//
// Weights stay in their stored dtype (f32, f16 or bf16) inside the
// memory-mapped safetensors files; the kernels convert half-precision panels as
// they stream them, so resident memory after Load stays near the size of the
// files. Only vectors (biases, norm weights) are copied to f32.
//
// # Sessions
//
// A Session holds one sequence's key/value cache. Session.Close hands its
// memory back to the model, and the next NewSession fills that memory
// instead of fresh pages (a first touch of each fresh page costs a fault,
// which on some virtual machines is a measurable share of a decode step).
// The scoring and generation calls close the sessions they make; a caller
// that makes its own closes them when done, or leaves them to the garbage
// collector.
//
// # Determinism
//
// Every kernel computes each output element with one ascending reduction, and
// work is split only over independent outputs, so a sequence scores bit for
// bit the same alone or inside a batch, at any thread count, with or without a
// hook that keeps every unit. A different kernel path (assembly against pure
// Go) may move the last bits; golden tolerances absorb that.
//
// # Sparsity hook
//
// With no Hook the dense batched path runs unchanged. With a Hook, each token
// of each layer asks the hook which heads and which neurons to keep. Only the
// kept heads' queries, attention and output-projection columns are computed,
// and only the keys and values of the key/value heads they need; a key/value
// head nobody needed at a position is marked absent in the cache, and later
// queries of that head attend past the position (a skipped head contributes
// nothing there). The MLP computes only the kept neurons of its up (and gate)
// projection and reads only their columns of the down projection; when the
// rows of a batch keep most neurons, batched dense products with the dropped
// neurons zeroed give the same bits faster.
package engine

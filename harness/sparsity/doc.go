// Package sparsity turns a dense checkpoint into a sparse build: per token and
// per layer, only some MLP neurons and some attention heads run.
//
// # Builds
//
// A build is a directory with manifest.json (the format is documented field
// by field in MANIFEST.md) that names its dense base checkpoint by relative
// path and weights SHA-256, and sets, for every layer and each component
// (mlp, attention), one Rule:
//
//   - dense: every unit runs;
//   - oracle k: the k units of largest actual magnitude (|post-activation|
//     for neurons, output L2 norm for heads), the quality bound for a budget
//     of k;
//   - threshold t (MLP only): the neurons whose |post-activation| exceeds t,
//     or t·rms(MLP input) for a scale-free threshold;
//   - predictor k: the k units a trained low-rank Predictor scores highest,
//     reading the component's own input or, one layer ahead, the previous
//     layer's input; the weights live in a safetensors file beside the
//     manifest (WritePredictors);
//   - static: a fixed list of units.
//
// Open checks the manifest against the base (layers, widths, predictor
// tensors, the weights hash) and loads the base with engine.Load; New builds
// the same from an already loaded model. Manifest.Save writes a manifest
// atomically.
//
// # Running
//
// Build.Hook returns the engine.Hook that applies the rules token by token.
// HookOptions.Dense forces chosen units dense at run time, which is what a
// bisection toggles; a unit forced dense runs exactly as with a dense rule.
// Returning nil for dense units keeps the engine's results bit for bit those
// of running with no hook. The hook reuses its buffers (one hook per
// goroutine) and selects deterministically: ties go to the lower index.
//
// # Statistics
//
// With HookOptions.Stats the hook counts, per unit, tokens seen and units
// kept; with HookOptions.Recall it also measures the recall of each token's
// kept set against the oracle set of the same size. Stats.WriteTable prints
// them in a fixed layout.
//
// # Pruned checkpoints
//
// Prune writes a static mask into the weights themselves: the dropped
// neurons' and heads' rows and columns are zeroed, shapes are kept, and the
// result loads as an ordinary dense checkpoint, a second kind of candidate
// build (Build.StaticKeep gives the mask of a static build).
package sparsity

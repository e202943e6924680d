// Package synth writes synthetic checkpoints: random weights, seeded, in the
// tensor layout and config.json layout that open checkpoints of each family
// use, through the project's own safetensors writer. Tests, benchmarks and the
// numerical cross-check against the reference implementation run on them.
package synth

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
	"sparsegate/harness/tokenize"
)

// Options choose how a synthetic checkpoint is written.
type Options struct {
	// Seed fixes every weight; the same seed writes the same bytes.
	Seed uint64
	// DType is the stored type of the 2-D weights: checkpoint.F32 (default),
	// F16 or BF16. Vectors (norms, biases) use it too.
	DType checkpoint.DType
	// MaxShardBytes, when positive, writes sharded files with an index.
	MaxShardBytes int64
	// Edit, when set, may change any tensor's f32 values before encoding
	// (tests use it to plant NaN or to build special models).
	Edit func(name string, values []float32)
}

// Write creates dir (if needed) and writes config.json and the weights of a
// random model with architecture cfg.
func Write(dir string, cfg *checkpoint.Config, opts Options) error {
	if err := cfg.Validate(); err != nil {
		return fmt.Errorf("synthetic config: %w", err)
	}
	if opts.DType == "" {
		opts.DType = checkpoint.F32
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	rng := rand.New(rand.NewPCG(opts.Seed, 0x5eed))
	specs := cfg.TensorSpecs()
	tensors := make([]checkpoint.NamedTensor, 0, len(specs))
	for _, s := range specs {
		n := 1
		for _, d := range s.Shape {
			n *= d
		}
		vals := make([]float32, n)
		fill(vals, s, rng)
		if opts.Edit != nil {
			opts.Edit(s.Name, vals)
		}
		data, err := encode(vals, opts.DType)
		if err != nil {
			return err
		}
		tensors = append(tensors, checkpoint.NamedTensor{Name: s.Name, DType: opts.DType, Shape: s.Shape, Data: data})
	}
	meta := map[string]string{"format": "pt"}
	var err error
	if opts.MaxShardBytes > 0 {
		err = checkpoint.WriteSharded(dir, tensors, meta, opts.MaxShardBytes)
	} else {
		err = checkpoint.Write(filepath.Join(dir, "model.safetensors"), tensors, meta)
	}
	if err != nil {
		return err
	}
	return checkpoint.WriteConfig(dir, cfg)
}

// fill draws a tensor's values: norm weights near 1, biases small, matrices
// with standard deviation 1/sqrt(fan-in) so activations keep their scale and
// logits spread enough that greedy choices are not near-ties.
func fill(v []float32, s checkpoint.TensorSpec, rng *rand.Rand) {
	name := s.Name
	isNorm := strings.Contains(name, "norm") || strings.Contains(name, "ln_")
	switch {
	case isNorm && strings.HasSuffix(name, ".weight"):
		for i := range v {
			v[i] = float32(1 + 0.1*rng.NormFloat64())
		}
	case len(s.Shape) == 1:
		for i := range v {
			v[i] = float32(0.1 * rng.NormFloat64())
		}
	default:
		std := 1 / math.Sqrt(float64(s.Shape[1]))
		if strings.Contains(name, "embed") || strings.HasPrefix(name, "wte") || strings.HasPrefix(name, "wpe") {
			std = 0.5
		}
		if strings.Contains(name, "c_") { // Conv1D layout: fan-in is the first dimension
			std = 1 / math.Sqrt(float64(s.Shape[0]))
		}
		for i := range v {
			v[i] = float32(std * rng.NormFloat64())
		}
	}
}

func encode(v []float32, dt checkpoint.DType) ([]byte, error) {
	switch dt {
	case checkpoint.F32:
		return checkpoint.EncodeF32(v), nil
	case checkpoint.F16:
		h := make([]uint16, len(v))
		kernels.F32ToF16(h, v)
		return checkpoint.EncodeU16(h), nil
	case checkpoint.BF16:
		h := make([]uint16, len(v))
		kernels.F32ToBF16(h, v)
		return checkpoint.EncodeU16(h), nil
	}
	return nil, fmt.Errorf("synthetic weights cannot be stored as %s; use F32, F16 or BF16", dt)
}

// Tiny returns a small config of the family, fast enough for unit tests.
func Tiny(f checkpoint.Family) *checkpoint.Config {
	c := &checkpoint.Config{Family: f, VocabSize: 96, Hidden: 32, Layers: 2, Heads: 4, KVHeads: 4,
		HeadDim: 8, FFN: 64, MaxPositions: 64, NormEps: 1e-5, BOS: -1, EOS: -1, PAD: -1}
	switch f {
	case checkpoint.OPT:
		c.Activation, c.PositionOffset, c.TiedHead = "relu", 2, true
	case checkpoint.GPT2:
		c.Activation, c.TiedHead = "gelu_new", true
	case checkpoint.Llama:
		c.Activation, c.KVHeads, c.RopeTheta, c.NormEps = "silu", 2, 10000, 1e-6
	}
	return c
}

// OPT125M returns the architecture of a 125M-parameter OPT-family model
// (12 layers, width 768, MLP 3072, vocabulary 50272), used by the benchmarks.
func OPT125M() *checkpoint.Config {
	return &checkpoint.Config{Family: checkpoint.OPT, VocabSize: 50272, Hidden: 768, Layers: 12, Heads: 12,
		KVHeads: 12, HeadDim: 64, FFN: 3072, MaxPositions: 2048, PositionOffset: 2, NormEps: 1e-5,
		Activation: "relu", TiedHead: true, BOS: 2, EOS: 2, PAD: 1}
}

// WithTokenizer trains a byte-level BPE tokenizer of vocab ids on corpus (with
// "<s>", "</s>" and "<pad>" specials; BOS prepended, as OPT-style checkpoints
// do), saves it into dir, and sets cfg's vocabulary size and special ids to
// match. Call it before Write.
func WithTokenizer(dir string, cfg *checkpoint.Config, corpus []string, vocab int) error {
	tok, err := tokenize.Train(corpus, tokenize.TrainOptions{
		VocabSize: vocab, Specials: []string{"<s>", "<pad>", "</s>"},
		AddBOS: true, BOS: "</s>", EOS: "</s>", PAD: "<pad>",
	})
	if err != nil {
		return fmt.Errorf("training the synthetic tokenizer: %w", err)
	}
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	if err := tok.Save(dir); err != nil {
		return err
	}
	cfg.VocabSize = max(cfg.VocabSize, tok.VocabSize())
	cfg.BOS, _ = tok.BOS()
	cfg.EOS, _ = tok.EOS()
	cfg.PAD, _ = tok.PAD()
	return nil
}

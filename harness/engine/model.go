package engine

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"slices"
	"sort"
	"strings"
	"sync"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
	"sparsegate/harness/tokenize"
	"sparsegate/harness/weightmem"
)

// A Model is a loaded checkpoint ready to run. It is safe for concurrent use
// by several Sessions; it holds the weight mapping open until Close.
type Model struct {
	// Config is the architecture read from config.json.
	Config *checkpoint.Config
	// Dir is the checkpoint directory.
	Dir string
	// Tokenizer is the checkpoint's tokenizer, nil when the directory has none.
	Tokenizer *tokenize.Tokenizer

	weights  *checkpoint.Weights
	mem      *weightmem.Arena // the panel, neuron-major and widened copies; unmapped by Close
	threads  int
	borrowed bool // a Hybrid: the weights belong to other models

	embed  *kernels.Mat // token embedding, V×d
	pos    *kernels.Mat // learned positions (OPT, GPT-2), nil for rotary
	layers []layer
	normW  []float32
	normB  []float32
	head   *kernels.Mat // output head, V×d (the embedding when tied)
	rope   []float32    // inverse frequencies (Llama)

	scratch *kernels.Scratch                    // the products' packing buffers, reused across calls
	attn    *sync.Pool                          // of *attnScratch: blocked attention's buffers
	kvFree  *sync.Pool                          // of *kvMemory: closed sessions' caches, for NewSession
	states  *sync.Pool                          // of *state: single-row Forward scratch, reused
	sources map[*kernels.Mat]*checkpoint.Tensor // the tensor each matrix was bound from, until Load returns
}

// layer holds one decoder block's weights. For GPT-2, qkv is the fused
// projection (Out = 3d); otherwise q, k and v are separate.
type layer struct {
	attnNormW, attnNormB []float32
	qkv, q, k, v, o      *kernels.Mat
	qkvB, qB, kB, vB, oB []float32
	mlpNormW, mlpNormB   []float32
	up, gate, down       *kernels.Mat
	neurons              *neuronRows  // the MLP's neuron-major copy (Options.NeuronMajor), or nil
	downFinite           bool         // every down weight is finite (checked with NeuronMajor): sparse rows drop zero activations
	oT                   *kernels.Mat // input-major copy of o (Options.NeuronMajor with NoPanels), or nil
	upB, downB           []float32
}

// Options tune how a model runs; the zero value is usable.
type Options struct {
	// Threads is the number of worker goroutines for the kernels; 0 means
	// runtime.NumCPU(). Results do not depend on it.
	Threads int
	// NoTokenizer skips loading the tokenizer files even when present.
	NoTokenizer bool
	// NeuronMajor keeps neuron-major copies in memory, so that a sparse MLP
	// or a head-sparse attention reads only its kept neurons' or heads'
	// weights, each as one contiguous run: per MLP neuron its gate row
	// (SwiGLU), up row and down column side by side (neuronRows), and, with
	// NoPanels, for layouts that store the attention output projection
	// output-major (OPT, Llama), an input-major copy of it (with panels, a
	// kept head's inputs are already one contiguous stretch of each panel
	// of the output projection: kernels.LinearScatterInPanels). It costs
	// parts·FFN×Hidden stored values per layer, parts being 2 (3 with a
	// gate), plus Heads·HeadDim×Hidden with NoPanels; sparse builds turn it
	// on. Results are the same bits either way.
	NeuronMajor bool
	// NoPanels skips the k-major panel copies (kernels.PackPanels) that Load
	// makes of every layer projection and of the output head. The copies let
	// single-token steps stream each matrix without transposing it in
	// registers and let the products pack their weight panels by converting
	// contiguous runs; they cost one more copy of those weights in their
	// stored dtype (about the checkpoint's size again) and change no result.
	NoPanels bool
	// NoWiden keeps a small model's half-precision projections at their
	// stored width. By default, when every projection and the head are f16
	// or bf16 and they hold at most widenMaxWeights values, Load widens them
	// to f32 (exactly: every half value is a float32) before packing their
	// panels, so the products read them in place with no per-call
	// conversion, at 8 bytes per weight instead of 4; larger models, whose
	// steps are bound by memory bandwidth, keep the stored width. Results
	// are the same bits either way.
	NoWiden bool
}

// widenMaxWeights bounds the projection and head weights a model may have
// for Load to widen them to f32 (64 MiB of f32 values and panels).
const widenMaxWeights = 8 << 20

// Load opens a checkpoint directory: config.json, the safetensors weights
// (single file or sharded) and, when present, the tokenizer. Every tensor the
// family's layout needs is checked for presence, dtype and shape; errors name
// the file and the tensor.
func Load(dir string, opts Options) (*Model, error) {
	cfg, err := checkpoint.LoadConfig(filepath.Join(dir, "config.json"))
	if err != nil {
		return nil, err
	}
	w, err := checkpoint.OpenWeights(dir)
	if err != nil {
		return nil, err
	}
	m := &Model{Config: cfg, Dir: dir, weights: w, mem: weightmem.New(), threads: opts.Threads, scratch: new(kernels.Scratch), attn: new(sync.Pool), kvFree: new(sync.Pool), states: new(sync.Pool)}
	if m.threads <= 0 {
		m.threads = runtime.NumCPU()
	}
	if m.threads > 1 {
		// Helpers that stay awake between the short parallel regions of
		// a single-token step (started on first use, stopped by Close).
		m.scratch.Team = kernels.NewTeam(m.threads - 1)
	}
	if err := m.bind(); err != nil {
		m.Close()
		return nil, err
	}
	if opts.NeuronMajor {
		parallelJobs(len(m.layers), m.threads, func(next func() (int, bool)) {
			for i, ok := next(); ok; i, ok = next() {
				L := &m.layers[i]
				L.neurons = newNeuronRows(m.mem, L.up, L.gate, L.down)
				L.downFinite = L.down.Finite()
				if o := L.o; o != nil && !o.Transposed && opts.NoPanels {
					// With panels, kept heads read o's panels instead.
					L.oT = kernels.InputMajorIn(o, m.mem)
				}
			}
		})
	}
	if !opts.NoPanels {
		m.packPanels(!opts.NoWiden)
	}
	m.sources = nil
	if !opts.NoTokenizer && hasTokenizer(dir) {
		tok, err := tokenize.LoadDir(dir)
		if err != nil {
			m.Close()
			return nil, err
		}
		if tok.VocabSize() > cfg.VocabSize {
			w.Close()
			return nil, fmt.Errorf("%s: the tokenizer has %d tokens but the embedding %s has only %d rows; the tokenizer does not belong to this checkpoint",
				dir, tok.VocabSize(), embedName(cfg), cfg.VocabSize)
		}
		m.Tokenizer = tok
	}
	return m, nil
}

func hasTokenizer(dir string) bool {
	for _, f := range []string{"tokenizer.json", "vocab.json"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err == nil {
			return true
		}
	}
	return false
}

// embedName gives the name of the token embedding for messages.
func embedName(cfg *checkpoint.Config) string {
	switch cfg.Family {
	case checkpoint.OPT:
		return "model.decoder.embed_tokens.weight"
	case checkpoint.GPT2:
		return "wte.weight"
	default:
		return "model.embed_tokens.weight"
	}
}

// Close releases the weight mapping. The Model must not be used afterwards.
func (m *Model) Close() error {
	if m.borrowed {
		return nil
	}
	m.scratch.Team.Close()
	err := m.weights.Close()
	if merr := m.mem.Close(); err == nil {
		err = merr
	}
	return err
}

// Scratch returns the packing buffers and helper team the model's products
// run on, for a hook that runs its own products within the model's calls
// (kernels.Scratch is safe for concurrent use).
func (m *Model) Scratch() *kernels.Scratch { return m.scratch }

// Weights returns the checkpoint's weight set (for inspection and hashing).
func (m *Model) Weights() *checkpoint.Weights { return m.weights }

// Threads returns the number of kernel workers the model uses.
func (m *Model) Threads() int { return m.threads }

// WithThreads returns a view of m whose kernels use n workers (n >= 1). It
// shares m's weights and buffers' pools (closing it does nothing; close m
// when done), may run concurrently with m and other views, and gives the
// same bits as m: no result depends on the thread count.
func (m *Model) WithThreads(n int) *Model {
	if n < 1 {
		panic("engine: WithThreads needs n >= 1")
	}
	v := *m
	v.threads = n
	v.borrowed = true
	return &v
}

// binder resolves layout names to tensors, accepting the name prefixes that
// open checkpoints of each family use, and records which tensors it used.
type binder struct {
	w       *checkpoint.Weights
	prefix  string // prepended to layout names in this checkpoint
	used    map[string]bool
	errs    []string
	sources map[*kernels.Mat]*checkpoint.Tensor // each bound matrix's tensor
}

func (b *binder) tensor(name string, shape ...int) *checkpoint.Tensor {
	full := b.prefix + name
	t, ok := b.w.Lookup(full)
	if !ok {
		b.errs = append(b.errs, fmt.Sprintf("tensor %q is missing from %s", full, strings.Join(baseNames(b.w.Files()), ", ")))
		return nil
	}
	b.used[full] = true
	if !slices.Equal(t.Shape, shape) {
		b.errs = append(b.errs, fmt.Sprintf("%s: tensor %q has shape %v but config.json implies %v", t.File, full, t.Shape, shape))
		return nil
	}
	switch t.DType {
	case checkpoint.F32, checkpoint.F16, checkpoint.BF16:
	default:
		b.errs = append(b.errs, fmt.Sprintf("%s: tensor %q has dtype %s; weights must be F32, F16 or BF16", t.File, full, t.DType))
		return nil
	}
	return t
}

// mat binds a 2-D weight as a linear map. transposed says the stored layout
// is In×Out (GPT-2 Conv1D); shape is the stored shape.
func (b *binder) mat(name string, transposed bool, shape ...int) *kernels.Mat {
	t := b.tensor(name, shape...)
	if t == nil {
		return nil
	}
	m := &kernels.Mat{Out: shape[0], In: shape[1], Transposed: transposed}
	b.sources[m] = t
	if transposed {
		m.Out, m.In = shape[1], shape[0]
	}
	var err error
	switch t.DType {
	case checkpoint.F32:
		m.DType = kernels.F32
		m.F32, err = t.Float32s()
	case checkpoint.F16:
		m.DType = kernels.F16
		m.Half, err = t.Uint16s()
	case checkpoint.BF16:
		m.DType = kernels.BF16
		m.Half, err = t.Uint16s()
	}
	if err != nil {
		b.errs = append(b.errs, fmt.Sprintf("%s: tensor %q: %v", t.File, b.prefix+name, err))
		return nil
	}
	return m
}

// vec binds a 1-D weight, converted to f32 (vectors are small).
func (b *binder) vec(name string, n int) []float32 {
	t := b.tensor(name, n)
	if t == nil {
		return nil
	}
	out := make([]float32, n)
	switch t.DType {
	case checkpoint.F32:
		v, err := t.Float32s()
		if err != nil {
			b.errs = append(b.errs, fmt.Sprintf("%s: tensor %q: %v", t.File, b.prefix+name, err))
			return nil
		}
		copy(out, v)
	case checkpoint.F16, checkpoint.BF16:
		v, err := t.Uint16s()
		if err != nil {
			b.errs = append(b.errs, fmt.Sprintf("%s: tensor %q: %v", t.File, b.prefix+name, err))
			return nil
		}
		if t.DType == checkpoint.F16 {
			kernels.F16ToF32(out, v)
		} else {
			kernels.BF16ToF32(out, v)
		}
	}
	return out
}

func baseNames(paths []string) []string {
	out := make([]string, len(paths))
	for i, p := range paths {
		out[i] = filepath.Base(p)
	}
	return out
}

// detectPrefix finds the prefix under which this checkpoint stores the layout's
// embedding tensor.
func detectPrefix(cfg *checkpoint.Config, w *checkpoint.Weights) string {
	embed := map[checkpoint.Family]string{
		checkpoint.OPT:   "model.decoder.embed_tokens.weight",
		checkpoint.GPT2:  "wte.weight",
		checkpoint.Llama: "model.embed_tokens.weight",
	}[cfg.Family]
	if _, ok := w.Lookup(embed); ok {
		return ""
	}
	alts := map[checkpoint.Family][]string{
		checkpoint.GPT2: {"transformer."},
	}[cfg.Family]
	for _, p := range alts {
		if _, ok := w.Lookup(p + embed); ok {
			return p
		}
	}
	return ""
}

// bind resolves every tensor of the layout and reports all problems at once.
func (m *Model) bind() error {
	cfg := m.Config
	b := &binder{w: m.weights, used: map[string]bool{}, sources: map[*kernels.Mat]*checkpoint.Tensor{}}
	defer func() { m.sources = b.sources }()
	b.prefix = detectPrefix(cfg, m.weights)
	d, f, v := cfg.Hidden, cfg.FFN, cfg.VocabSize
	m.layers = make([]layer, cfg.Layers)
	switch cfg.Family {
	case checkpoint.OPT:
		p := "model.decoder."
		m.embed = b.mat(p+"embed_tokens.weight", false, v, d)
		m.pos = b.mat(p+"embed_positions.weight", false, cfg.MaxPositions+cfg.PositionOffset, d)
		for i := range m.layers {
			l := &m.layers[i]
			n := fmt.Sprintf("%slayers.%d.", p, i)
			l.attnNormW, l.attnNormB = b.vec(n+"self_attn_layer_norm.weight", d), b.vec(n+"self_attn_layer_norm.bias", d)
			l.q, l.qB = b.mat(n+"self_attn.q_proj.weight", false, d, d), b.vec(n+"self_attn.q_proj.bias", d)
			l.k, l.kB = b.mat(n+"self_attn.k_proj.weight", false, d, d), b.vec(n+"self_attn.k_proj.bias", d)
			l.v, l.vB = b.mat(n+"self_attn.v_proj.weight", false, d, d), b.vec(n+"self_attn.v_proj.bias", d)
			l.o, l.oB = b.mat(n+"self_attn.out_proj.weight", false, d, d), b.vec(n+"self_attn.out_proj.bias", d)
			l.mlpNormW, l.mlpNormB = b.vec(n+"final_layer_norm.weight", d), b.vec(n+"final_layer_norm.bias", d)
			l.up, l.upB = b.mat(n+"fc1.weight", false, f, d), b.vec(n+"fc1.bias", f)
			l.down, l.downB = b.mat(n+"fc2.weight", false, d, f), b.vec(n+"fc2.bias", d)
		}
		m.normW, m.normB = b.vec(p+"final_layer_norm.weight", d), b.vec(p+"final_layer_norm.bias", d)
	case checkpoint.GPT2:
		m.embed = b.mat("wte.weight", false, v, d)
		m.pos = b.mat("wpe.weight", false, cfg.MaxPositions, d)
		for i := range m.layers {
			l := &m.layers[i]
			n := fmt.Sprintf("h.%d.", i)
			l.attnNormW, l.attnNormB = b.vec(n+"ln_1.weight", d), b.vec(n+"ln_1.bias", d)
			l.qkv, l.qkvB = b.mat(n+"attn.c_attn.weight", true, d, 3*d), b.vec(n+"attn.c_attn.bias", 3*d)
			l.o, l.oB = b.mat(n+"attn.c_proj.weight", true, d, d), b.vec(n+"attn.c_proj.bias", d)
			l.mlpNormW, l.mlpNormB = b.vec(n+"ln_2.weight", d), b.vec(n+"ln_2.bias", d)
			l.up, l.upB = b.mat(n+"mlp.c_fc.weight", true, d, f), b.vec(n+"mlp.c_fc.bias", f)
			l.down, l.downB = b.mat(n+"mlp.c_proj.weight", true, f, d), b.vec(n+"mlp.c_proj.bias", d)
		}
		m.normW, m.normB = b.vec("ln_f.weight", d), b.vec("ln_f.bias", d)
	case checkpoint.Llama:
		q, kv := cfg.Heads*cfg.HeadDim, cfg.KVHeads*cfg.HeadDim
		m.embed = b.mat("model.embed_tokens.weight", false, v, d)
		for i := range m.layers {
			l := &m.layers[i]
			n := fmt.Sprintf("model.layers.%d.", i)
			l.attnNormW = b.vec(n+"input_layernorm.weight", d)
			l.q = b.mat(n+"self_attn.q_proj.weight", false, q, d)
			l.k = b.mat(n+"self_attn.k_proj.weight", false, kv, d)
			l.v = b.mat(n+"self_attn.v_proj.weight", false, kv, d)
			l.o = b.mat(n+"self_attn.o_proj.weight", false, d, q)
			l.mlpNormW = b.vec(n+"post_attention_layernorm.weight", d)
			l.gate = b.mat(n+"mlp.gate_proj.weight", false, f, d)
			l.up = b.mat(n+"mlp.up_proj.weight", false, f, d)
			l.down = b.mat(n+"mlp.down_proj.weight", false, d, f)
		}
		m.normW = b.vec("model.norm.weight", d)
		m.rope = kernels.RopeInvFreq(cfg.HeadDim, cfg.RopeTheta)
	default:
		return fmt.Errorf("%s: family %q has no forward pass", m.Dir, cfg.Family)
	}
	if cfg.TiedHead {
		m.head = m.embed
		if _, ok := m.weights.Lookup(b.prefix + "lm_head.weight"); ok {
			b.used[b.prefix+"lm_head.weight"] = true // a stored copy of the tied head
		}
		if _, ok := m.weights.Lookup("lm_head.weight"); ok {
			b.used["lm_head.weight"] = true
		}
	} else {
		name := "lm_head.weight"
		if _, ok := m.weights.Lookup(name); ok && b.prefix != "" {
			// The head sits outside the body's prefix in open checkpoints.
			saved := b.prefix
			b.prefix = ""
			m.head = b.mat(name, false, v, d)
			b.prefix = saved
		} else {
			m.head = b.mat(name, false, v, d)
		}
	}
	var extra []string
	for _, n := range m.weights.Names() {
		if !b.used[n] && !ignorable(cfg.Family, n) {
			extra = append(extra, n)
		}
	}
	if len(extra) > 0 {
		sort.Strings(extra)
		if len(extra) > 5 {
			extra = append(extra[:5], fmt.Sprintf("and %d more", len(extra)-5))
		}
		b.errs = append(b.errs, fmt.Sprintf("unexpected tensors for a %s checkpoint with %d layers: %s; check config.json (model_type, num_hidden_layers)", cfg.Family, cfg.Layers, strings.Join(extra, ", ")))
	}
	if len(b.errs) > 0 {
		if len(b.errs) > 8 {
			b.errs = append(b.errs[:8], fmt.Sprintf("and %d more problems", len(b.errs)-8))
		}
		return fmt.Errorf("%s: the weights do not match config.json:\n  %s", m.Dir, strings.Join(b.errs, "\n  "))
	}
	return nil
}

// ignorable reports buffers that some open checkpoints store beside the
// parameters (GPT-2's causal-mask buffers, rotary caches).
func ignorable(f checkpoint.Family, name string) bool {
	switch {
	case f == checkpoint.GPT2 && (strings.HasSuffix(name, ".attn.bias") || strings.HasSuffix(name, ".attn.masked_bias")):
		return true
	case f == checkpoint.Llama && strings.HasSuffix(name, ".rotary_emb.inv_freq"):
		return true
	}
	return false
}

// packPanels gives each layer projection and the output head its panel copy,
// packing the matrices on up to m.threads goroutines. The head gets a copy
// of its Mat, so a tied embedding table stays without panels (lookups read
// its rows). After packing a matrix it releases the mapped pages it read
// (checkpoint.Tensor.Release), so that resident memory holds about one copy
// of the weights rather than two; whatever still reads the stored layout (an
// embedding row, a sparse MLP's gathered rows) brings its pages back from
// the file.
//
// With widen, a small half-precision model's matrices are first widened to
// f32 in place (see Options.NoWiden).
func (m *Model) packPanels(widen bool) {
	var mats []*kernels.Mat
	for i := range m.layers {
		L := &m.layers[i]
		for _, w := range []*kernels.Mat{L.qkv, L.q, L.k, L.v, L.o, L.up, L.gate, L.down} {
			if w != nil {
				mats = append(mats, w)
			}
		}
	}
	head := *m.head
	m.sources[&head] = m.sources[m.head]
	m.head = &head
	mats = append(mats, m.head)
	var weights int
	for _, w := range mats {
		widen = widen && w.DType != kernels.F32
		weights += w.Out * w.In
	}
	widen = widen && weights <= widenMaxWeights
	// Matrices differ in size (the head is a third of OPT-125M), so workers
	// take the next matrix as they finish rather than fixed shares.
	panels := make([]*kernels.Panels, len(mats))
	parallelJobs(len(mats), m.threads, func(next func() (int, bool)) {
		for i, ok := next(); ok; i, ok = next() {
			if widen {
				widenMat(m.mem, mats[i])
			}
			panels[i] = kernels.PackPanelsIn(mats[i], m.mem)
			if t := m.sources[mats[i]]; t != nil {
				t.Release()
			}
		}
	})
	for i, w := range mats {
		w.Panels = panels[i]
	}
}

// widenMat replaces w's half-precision storage by the same values in f32,
// held in mem.
func widenMat(mem *weightmem.Arena, w *kernels.Mat) {
	f := mem.Float32s(len(w.Half))
	if w.DType == kernels.F16 {
		kernels.F16ToF32(f, w.Half)
	} else {
		kernels.BF16ToF32(f, w.Half)
	}
	w.DType, w.F32, w.Half = kernels.F32, f, nil
}

// ErrNonFinite marks scores computed from NaN or infinite logits.
var ErrNonFinite = errors.New("non-finite logits")

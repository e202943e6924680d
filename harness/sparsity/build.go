package sparsity

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
)

// OpenOptions tune how a build is opened; the zero value is usable.
type OpenOptions struct {
	// Engine tunes the loaded base model (threads, tokenizer).
	Engine engine.Options
}

// A Build is an opened sparse build: its manifest, its loaded dense base and
// the predictor weights its rules use. Close it when done.
type Build struct {
	// Dir is the build directory ("" for a build made with New).
	Dir string
	// Manifest is the build's manifest as read.
	Manifest *Manifest
	// Base is the loaded dense base.
	Base *engine.Model

	rules   []LayerRules // by layer
	preds   map[Unit]*Predictor
	scoring map[Unit][2]kernels.Mat // each predictor's two matrices as the hooks score with them (Predictor.scoringMats)
	owns    bool                    // Close closes Base
}

// Open reads DIR/manifest.json, checks it against its base checkpoint, loads
// the base with engine.Load and the predictor weights, and verifies that the
// base's weights hash matches the manifest. Every error names the manifest
// file, the place (line:col, layer and component) and the fix.
func Open(dir string, opts OpenOptions) (*Build, error) {
	path := filepath.Join(dir, ManifestFile)
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("reading build manifest: %w; point at a build directory holding %s", err, ManifestFile)
	}
	m, pos, err := parseManifest(path, data)
	if err != nil {
		return nil, err
	}
	baseDir := m.Base.Path
	if !filepath.IsAbs(baseDir) {
		baseDir = filepath.Join(dir, baseDir)
	}
	if st, err := os.Stat(baseDir); err != nil || !st.IsDir() {
		return nil, issuesError(path, data, []issue{{pos.at("base.path"), "base",
			fmt.Sprintf("directory %s (base.path %q, relative to the build directory) does not exist; fix base.path or put the dense base checkpoint there", baseDir, m.Base.Path)}})
	}
	cfg, err := checkpoint.LoadConfig(filepath.Join(baseDir, "config.json"))
	if err != nil {
		return nil, fmt.Errorf("%s: base: %w", path, err)
	}
	if err := issuesError(path, data, m.check(cfg, pos)); err != nil {
		return nil, err
	}
	var preds map[Unit]*Predictor
	if needsPredictors(m) {
		var list []issue
		preds, list = readPredictors(filepath.Join(dir, m.Predictors), m, cfg, pos)
		if err := issuesError(path, data, list); err != nil {
			return nil, err
		}
	}
	eopts := opts.Engine
	eopts.NeuronMajor = true // masked MLPs read only their kept neurons' weights
	base, err := engine.Load(baseDir, eopts)
	if err != nil {
		return nil, fmt.Errorf("%s: base: %w", path, err)
	}
	sum, err := base.Weights().SHA256()
	if err == nil && sum != m.Base.SHA256 {
		err = issuesError(path, data, []issue{{pos.at("base.sha256"), "base",
			fmt.Sprintf("the weights in %s have sha256 %s but the manifest records %s; the base changed since the build was made: point base.path at the original checkpoint, or rebuild the build for this base", baseDir, sum, m.Base.SHA256)}})
	}
	if err != nil {
		base.Close()
		return nil, err
	}
	b, err := newBuild(base, m, preds)
	if err != nil {
		base.Close()
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	b.Dir, b.owns = dir, true
	return b, nil
}

// New makes a build from an already loaded base, a manifest and its
// predictors (keyed by unit), without reading files: for calibration and
// tests. It checks the manifest against base.Config and the predictors'
// shapes and values, but not the manifest's base path or hash. Close does not
// close base.
func New(base *engine.Model, m *Manifest, predictors map[Unit]*Predictor) (*Build, error) {
	if err := issuesError("build manifest", nil, m.check(base.Config, nil)); err != nil {
		return nil, err
	}
	return newBuild(base, m, predictors)
}

func newBuild(base *engine.Model, m *Manifest, preds map[Unit]*Predictor) (*Build, error) {
	cfg := base.Config
	b := &Build{Manifest: m, Base: base, rules: make([]LayerRules, cfg.Layers), preds: map[Unit]*Predictor{},
		scoring: map[Unit][2]kernels.Mat{}}
	for _, lr := range m.Layers {
		b.rules[lr.Layer] = lr
	}
	var errs []error
	for _, u := range b.Units() {
		r := b.Rule(u)
		if r.Mode != PredictorMode {
			continue
		}
		p := preds[u]
		switch {
		case p == nil:
			errs = append(errs, fmt.Errorf("%s: mode predictor but no predictor weights were given; train one or change the mode", u))
			continue
		case p.In != cfg.Hidden || p.Rank != r.Rank || p.Out != b.Width(u):
			errs = append(errs, fmt.Errorf("%s: predictor shape %d→%d→%d, but the rule needs %d→%d→%d (hidden, rank, units)", u, p.In, p.Rank, p.Out, cfg.Hidden, r.Rank, b.Width(u)))
			continue
		}
		if err := p.Check(); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w; retrain the predictor", u, err))
			continue
		}
		b.preds[u] = p
		// The hooks score one token at a time; the panel copies (in
		// binary16 when the weights are binary16 values) let the
		// single-vector products stream them, with the same bits.
		b.scoring[u] = p.scoringMats()
	}
	if len(errs) > 0 {
		return nil, errors.Join(errs...)
	}
	return b, nil
}

// Close releases the base model when Open loaded it.
func (b *Build) Close() error {
	if b.owns {
		return b.Base.Close()
	}
	return nil
}

// Rule returns unit u's rule (dense for a unit outside the model). Its Keep
// list is the build's own; do not modify it.
func (b *Build) Rule(u Unit) Rule {
	if u.Layer < 0 || u.Layer >= len(b.rules) {
		return Rule{Mode: Dense}
	}
	return *b.rules[u.Layer].Rule(u.Component)
}

// Layers returns the per-layer rules, indexed by layer.
func (b *Build) Layers() []LayerRules { return slices.Clone(b.rules) }

// Predictor returns unit u's predictor, nil unless its rule is a predictor.
func (b *Build) Predictor(u Unit) *Predictor { return b.preds[u] }

// Width returns the number of units of u's component: the MLP width (FFN) or
// the number of attention heads.
func (b *Build) Width(u Unit) int { return unitWidth(b.Base.Config, u.Component) }

// Units returns every unit whose rule is not dense: by layer, mlp before
// attention.
func (b *Build) Units() []Unit {
	var out []Unit
	for l := range b.rules {
		for _, c := range Components() {
			if b.rules[l].Rule(c).Mode != Dense {
				out = append(out, Unit{Layer: l, Component: c})
			}
		}
	}
	return out
}

// StaticKeep returns the kept units of every static rule, for Prune. It fails
// when a rule is neither static nor dense (such a build has no fixed mask).
func (b *Build) StaticKeep() (map[Unit][]int, error) {
	keep := map[Unit][]int{}
	for _, u := range b.Units() {
		r := b.Rule(u)
		if r.Mode != Static {
			return nil, fmt.Errorf("%s: mode %s chooses units per token, so the build has no fixed mask to prune; use static or dense rules", u, r.Mode)
		}
		keep[u] = slices.Clone(r.Keep)
	}
	return keep, nil
}

func needsPredictors(m *Manifest) bool {
	for _, lr := range m.Layers {
		if lr.MLP.Mode == PredictorMode || lr.Attention.Mode == PredictorMode {
			return true
		}
	}
	return false
}

// PredictorTensorName returns the safetensors name of one part ("w1", "b1",
// "w2" or "b2") of unit u's predictor, e.g. "layers.3.mlp.w1".
func PredictorTensorName(u Unit, part string) string {
	return fmt.Sprintf("layers.%d.%s.%s", u.Layer, u.Component, part)
}

// readPredictors loads the predictor of every predictor rule from file.
func readPredictors(file string, m *Manifest, cfg *checkpoint.Config, pos positions) (map[Unit]*Predictor, []issue) {
	f, err := checkpoint.Open(file)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, []issue{{pos.at("predictors"), "predictors", fmt.Sprintf("file %s does not exist; write it with the predictor training, or fix \"predictors\"", file)}}
		}
		return nil, []issue{{pos.at("predictors"), "predictors", err.Error()}}
	}
	defer f.Close()
	preds := map[Unit]*Predictor{}
	var list []issue
	for i, lr := range m.Layers {
		for _, c := range Components() {
			r := lr.Rule(c)
			if r.Mode != PredictorMode {
				continue
			}
			u := Unit{Layer: lr.Layer, Component: c}
			p := NewPredictor(cfg.Hidden, r.Rank, unitWidth(cfg, c))
			off := pos.at(fmt.Sprintf("layers[%d].%s", i, c))
			ok := true
			for _, part := range []struct {
				name  string
				dst   []float32
				shape []int
			}{{"w1", p.W1, []int{p.Rank, p.In}}, {"b1", p.B1, []int{p.Rank}}, {"w2", p.W2, []int{p.Out, p.Rank}}, {"b2", p.B2, []int{p.Out}}} {
				name := PredictorTensorName(u, part.name)
				t, found := f.Tensor(name)
				var msg string
				switch {
				case !found:
					msg = fmt.Sprintf("%s: tensor %q is missing; retrain this unit's predictor or change its mode", file, name)
				case t.DType != checkpoint.F32 && (t.DType != checkpoint.F16 || part.name[0] != 'w'):
					msg = fmt.Sprintf("%s: tensor %q is %s; predictor matrices must be F16 or F32 and biases F32", file, name, t.DType)
				case !slices.Equal(t.Shape, part.shape):
					msg = fmt.Sprintf("%s: tensor %q has shape %v, but rank %d needs %v; fix rank or retrain the predictor", file, name, t.Shape, r.Rank, part.shape)
				case t.DType == checkpoint.F16:
					h, err := t.Uint16s()
					if err != nil {
						msg = err.Error()
						break
					}
					for j, b := range h {
						part.dst[j] = kernels.F16Value(b)
					}
				default:
					v, err := t.Float32s()
					if err != nil {
						msg = err.Error()
					} else {
						copy(part.dst, v)
					}
				}
				if msg != "" {
					list, ok = append(list, issue{off, u.String(), msg}), false
				}
			}
			if !ok {
				continue
			}
			if err := p.Check(); err != nil {
				list = append(list, issue{off, u.String(), fmt.Sprintf("%s: %v; retrain the predictor", file, err)})
				continue
			}
			preds[u] = p
		}
	}
	return preds, list
}

// WritePredictors writes predictors, keyed by unit, as a safetensors file at
// path (atomically), named as PredictorTensorName gives, in unit order: a
// matrix whose weights are all binary16 values (Predictor.RoundToHalf) as
// F16, any other as F32; biases as F32.
func WritePredictors(path string, predictors map[Unit]*Predictor) error {
	units := make([]Unit, 0, len(predictors))
	for u := range predictors {
		units = append(units, u)
	}
	slices.SortFunc(units, compareUnits)
	var tensors []checkpoint.NamedTensor
	for _, u := range units {
		p := predictors[u]
		if err := p.Check(); err != nil {
			return fmt.Errorf("%s: %s: %w", path, u, err)
		}
		for _, part := range []struct {
			name  string
			v     []float32
			shape []int
		}{{"w1", p.W1, []int{p.Rank, p.In}}, {"b1", p.B1, []int{p.Rank}}, {"w2", p.W2, []int{p.Out, p.Rank}}, {"b2", p.B2, []int{p.Out}}} {
			t := checkpoint.NamedTensor{Name: PredictorTensorName(u, part.name),
				DType: checkpoint.F32, Shape: part.shape, Data: checkpoint.EncodeF32(part.v)}
			if h, ok := halfExact(part.v); ok && part.name[0] == 'w' {
				t.DType, t.Data = checkpoint.F16, checkpoint.EncodeU16(h)
			}
			tensors = append(tensors, t)
		}
	}
	return checkpoint.Write(path, tensors, map[string]string{"format": FormatName + "-predictors"})
}

// compareUnits orders units by layer, then mlp before attention.
func compareUnits(a, b Unit) int {
	switch {
	case a.less(b):
		return -1
	case b.less(a):
		return 1
	}
	return 0
}

package sparsity

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
)

// checkpointSideFiles are the files beside the weights that Prune copies when
// the base has them: the config and the tokenizer files open checkpoints ship.
func checkpointSideFiles() []string {
	return []string{"config.json", "generation_config.json", "tokenizer.json", "vocab.json", "merges.txt",
		"tokenizer_config.json", "special_tokens_map.json"}
}

// Prune writes to outDir a dense checkpoint equal in function to running base
// with the static mask keep: for every unit in keep, the units not listed are
// zeroed in the weights (MLP: the neuron's rows of the up and gate
// projections, its up bias and its column of the down projection; attention:
// the head's query rows and bias and its columns of the output projection).
// Units absent from keep are left whole. Shapes and dtypes stay as they are,
// so the result loads as an ordinary checkpoint: one model.safetensors, plus
// config.json and the tokenizer files copied from the base.
func Prune(base *engine.Model, outDir string, keep map[Unit][]int) error {
	cfg := base.Config
	dropN := make([][]bool, cfg.Layers) // per layer, per neuron: zero it
	dropH := make([][]bool, cfg.Layers) // per layer, per head
	units := make([]Unit, 0, len(keep))
	for u := range keep {
		units = append(units, u)
	}
	slices.SortFunc(units, compareUnits)
	var errs []error
	for _, u := range units {
		if u.Layer < 0 || u.Layer >= cfg.Layers || (u.Component != MLP && u.Component != Attention) {
			errs = append(errs, fmt.Errorf("%s is not a unit of %s (layers 0 to %d, components mlp and attention)", u, base.Dir, cfg.Layers-1))
			continue
		}
		width := unitWidth(cfg, u.Component)
		if e := (Rule{Mode: Static, Keep: keep[u]}).check(u, width); len(e) > 0 {
			errs = append(errs, fmt.Errorf("%s: %s", u, e[0]))
			continue
		}
		drop := make([]bool, width)
		for i := range drop {
			drop[i] = true
		}
		for _, k := range keep[u] {
			drop[k] = false
		}
		if u.Component == MLP {
			dropN[u.Layer] = drop
		} else {
			dropH[u.Layer] = drop
		}
	}
	if len(errs) > 0 {
		return fmt.Errorf("prune %s: %w", base.Dir, errors.Join(errs...))
	}
	absOut, err1 := filepath.Abs(outDir)
	absBase, err2 := filepath.Abs(base.Dir)
	if err := errors.Join(err1, err2); err != nil {
		return fmt.Errorf("prune: %w", err)
	}
	if absOut == absBase {
		return fmt.Errorf("prune: the output directory %s is the base checkpoint; choose a new directory", outDir)
	}
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return fmt.Errorf("prune: %w", err)
	}
	if _, err := os.Stat(filepath.Join(outDir, checkpoint.IndexFileName)); err == nil {
		return fmt.Errorf("prune: %s already holds %s, which would make the output ambiguous; remove it or choose another directory", outDir, checkpoint.IndexFileName)
	}
	w := base.Weights()
	sum, err := w.SHA256()
	if err != nil {
		return fmt.Errorf("prune: %w", err)
	}
	layerName := regexp.MustCompile(`(?:^|\.)(?:layers|h)\.(\d+)\.(.+)$`)
	var tensors []checkpoint.NamedTensor
	for _, name := range w.Names() {
		t, _ := w.Lookup(name)
		nt := checkpoint.NamedTensor{Name: name, DType: t.DType, Shape: t.Shape, Data: t.Bytes()}
		if m := layerName.FindStringSubmatch(name); m != nil {
			l, err := strconv.Atoi(m[1])
			if err == nil && l < cfg.Layers && (dropN[l] != nil || dropH[l] != nil) {
				z := zeroer{t: t, neurons: dropN[l], heads: dropH[l], hd: cfg.HeadDim, d: cfg.Hidden}
				data, err := z.apply(cfg.Family, m[2])
				if err != nil {
					return fmt.Errorf("prune %s: %w", base.Dir, err)
				}
				nt.Data = data
			}
		}
		tensors = append(tensors, nt)
	}
	meta := map[string]string{"format": "pt", "sparsegate_pruned_from_sha256": sum}
	if err := checkpoint.Write(filepath.Join(outDir, checkpoint.SingleFileName), tensors, meta); err != nil {
		return fmt.Errorf("prune: %w", err)
	}
	for _, f := range checkpointSideFiles() {
		b, err := os.ReadFile(filepath.Join(base.Dir, f))
		if errors.Is(err, os.ErrNotExist) {
			continue
		}
		if err != nil {
			return fmt.Errorf("prune: %w", err)
		}
		if err := atomicfile.WriteFile(filepath.Join(outDir, f), b); err != nil {
			return fmt.Errorf("prune: %w", err)
		}
	}
	return nil
}

// A zeroer zeroes the dropped units' entries of one layer tensor, working on
// raw bytes so every dtype keeps its exact other values (zero is all-zero
// bits in F32, F16 and BF16).
type zeroer struct {
	t       *checkpoint.Tensor
	neurons []bool // nil: keep all
	heads   []bool // nil: keep all
	hd, d   int
}

// apply returns the tensor's bytes with the dropped entries zeroed (the
// original view when nothing in it is dropped). rest is the name after
// "layers.N.".
func (z zeroer) apply(f checkpoint.Family, rest string) ([]byte, error) {
	neuron := func(i int) bool { return z.neurons != nil && z.neurons[i] }
	head := func(i int) bool { return z.heads != nil && z.heads[i/z.hd] }
	qHead := func(i int) bool { return i < z.d && head(i) } // GPT-2 fused qkv: queries first
	type edit struct {
		dim  int // 0 rows, 1 columns, -1 elements of a vector
		drop func(int) bool
		n    int // extent of the indexed dimension the predicate covers
	}
	var e *edit
	nq := len(z.heads) * z.hd
	switch f {
	case checkpoint.OPT:
		e = map[string]*edit{
			"fc1.weight": {0, neuron, len(z.neurons)}, "fc1.bias": {-1, neuron, len(z.neurons)},
			"fc2.weight":              {1, neuron, len(z.neurons)},
			"self_attn.q_proj.weight": {0, head, nq}, "self_attn.q_proj.bias": {-1, head, nq},
			"self_attn.out_proj.weight": {1, head, nq},
		}[rest]
	case checkpoint.GPT2:
		e = map[string]*edit{
			"mlp.c_fc.weight": {1, neuron, len(z.neurons)}, "mlp.c_fc.bias": {-1, neuron, len(z.neurons)},
			"mlp.c_proj.weight":  {0, neuron, len(z.neurons)},
			"attn.c_attn.weight": {1, qHead, 3 * nq}, "attn.c_attn.bias": {-1, qHead, 3 * nq},
			"attn.c_proj.weight": {0, head, nq},
		}[rest]
	case checkpoint.Llama:
		e = map[string]*edit{
			"mlp.up_proj.weight": {0, neuron, len(z.neurons)}, "mlp.gate_proj.weight": {0, neuron, len(z.neurons)},
			"mlp.up_proj.bias": {-1, neuron, len(z.neurons)}, "mlp.gate_proj.bias": {-1, neuron, len(z.neurons)},
			"mlp.down_proj.weight":    {1, neuron, len(z.neurons)},
			"self_attn.q_proj.weight": {0, head, nq}, "self_attn.q_proj.bias": {-1, head, nq},
			"self_attn.o_proj.weight": {1, head, nq},
		}[rest]
	}
	if e == nil || e.n == 0 { // not a tensor of a pruned unit, or that component is whole
		return z.t.Bytes(), nil
	}
	shape, es := z.t.Shape, z.t.DType.Size()
	want := 2
	if e.dim < 0 {
		want = 1
	}
	if len(shape) != want || es == 0 || (e.dim >= 0 && shape[e.dim] != e.n) || (e.dim < 0 && shape[0] != e.n) {
		return nil, fmt.Errorf("%s: tensor %q has shape %v, which does not match the config's units (%d); the checkpoint layout is not the one Prune expects", z.t.File, z.t.Name, shape, e.n)
	}
	data := slices.Clone(z.t.Bytes())
	switch e.dim {
	case -1:
		for i := 0; i < shape[0]; i++ {
			if e.drop(i) {
				clear(data[i*es : (i+1)*es])
			}
		}
	case 0:
		row := shape[1] * es
		for r := 0; r < shape[0]; r++ {
			if e.drop(r) {
				clear(data[r*row : (r+1)*row])
			}
		}
	case 1:
		for r := 0; r < shape[0]; r++ {
			for c := 0; c < shape[1]; c++ {
				if e.drop(c) {
					p := (r*shape[1] + c) * es
					clear(data[p : p+es])
				}
			}
		}
	}
	return data, nil
}

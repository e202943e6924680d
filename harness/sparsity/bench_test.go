package sparsity

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"sync"
	"testing"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
	"sparsegate/harness/synth"
)

// The speed benchmarks run on an OPT-125M-shaped checkpoint with f16 weights
// (SPARSEGATE_BENCH_MODEL, or one written once per test binary). Compare the
// dense and sparse sub-benchmarks of one run as ratios (.ci/bench does).
var benchBase struct {
	once sync.Once
	dir  string
	err  error
}

func benchModel(b *testing.B) *engine.Model {
	dir := os.Getenv("SPARSEGATE_BENCH_MODEL")
	if dir == "" {
		benchBase.once.Do(func() {
			tmp, err := os.MkdirTemp("", "sparsegate-bench-")
			if err != nil {
				benchBase.err = err
				return
			}
			benchBase.dir = filepath.Join(tmp, "opt-125m")
			benchBase.err = synth.Write(benchBase.dir, synth.OPT125M(), synth.Options{Seed: 1, DType: checkpoint.F16})
		})
		if benchBase.err != nil {
			b.Fatal(benchBase.err)
		}
		dir = benchBase.dir
	}
	m, err := engine.Load(dir, engine.Options{Threads: 2, NeuronMajor: true})
	if err != nil {
		b.Fatal(err)
	}
	b.Cleanup(func() { m.Close() })
	return m
}

func TestMain(m *testing.M) {
	code := m.Run()
	if benchBase.dir != "" {
		os.RemoveAll(filepath.Dir(benchBase.dir))
	}
	os.Exit(code)
}

// predictorBuild makes an in-memory build: per layer an MLP predictor keeping
// keepMLP of the neurons and, when keepHeads > 0, a head predictor.
func predictorBuild(b *testing.B, m *engine.Model, keepMLP, keepHeads float64) *Build {
	cfg := m.Config
	sha, err := m.Weights().SHA256()
	if err != nil {
		b.Fatal(err)
	}
	man := &Manifest{Base: Base{Path: "../base", SHA256: sha}, Predictors: "predictors.safetensors", Layers: make([]LayerRules, cfg.Layers)}
	preds := map[Unit]*Predictor{}
	for l := range cfg.Layers {
		man.Layers[l] = LayerRules{Layer: l, MLP: Rule{Mode: PredictorMode, K: int(keepMLP * float64(cfg.FFN)), Rank: 64, Input: InputSelf},
			Attention: Rule{Mode: Dense}}
		// Weights rounded to binary16, as sparsify writes them.
		preds[Unit{l, MLP}] = randomPredictor(cfg.Hidden, 64, cfg.FFN, uint64(l))
		preds[Unit{l, MLP}].RoundToHalf()
		if keepHeads > 0 {
			man.Layers[l].Attention = Rule{Mode: PredictorMode, K: int(keepHeads * float64(cfg.Heads)), Rank: 16, Input: InputSelf}
			preds[Unit{l, Attention}] = randomPredictor(cfg.Hidden, 16, cfg.Heads, uint64(100+l))
			preds[Unit{l, Attention}].RoundToHalf()
		}
	}
	bld, err := New(m, man, preds)
	if err != nil {
		b.Fatal(err)
	}
	return bld
}

// BenchmarkMLPBlockDecode times one token through one layer's MLP block on
// one thread: dense (up, ReLU, down, on the panel copies the engine makes)
// against a predictor keeping 10% of the neurons (predictor scores, top-k,
// gathered up rows, the kept neurons ReLU left at zero dropped, scattered
// down columns).
func BenchmarkMLPBlockDecode(b *testing.B) {
	m := benchModel(b)
	cfg := m.Config
	bld := predictorBuild(b, m, 0.1, 0)
	x := make([]float32, cfg.Hidden)
	for i := range x {
		x[i] = float32(i%7) * 0.1
	}
	// The engine's layer-0 weights, reached through a one-token forward with
	// a hook that times nothing: simpler to rebuild the Mats from the tensors.
	w := m.Weights()
	mat := func(name string, out, in int) *kernels.Mat {
		t, _ := w.Lookup(name)
		h, err := t.Uint16s()
		if err != nil {
			b.Fatal(err)
		}
		return &kernels.Mat{DType: kernels.F16, Out: out, In: in, Half: h}
	}
	up := mat("model.decoder.layers.0.fc1.weight", cfg.FFN, cfg.Hidden)
	down := mat("model.decoder.layers.0.fc2.weight", cfg.Hidden, cfg.FFN)
	// The neuron-major copy a sparse build keeps (engine.Options.NeuronMajor,
	// harness/engine/neurons.go): neuron j's up row and down column side by
	// side, one storage seen as 2·FFN rows of Hidden for the gather (row 2j)
	// and as the Transposed matrix with 2·FFN inputs for the scatter (input
	// 2j+1).
	nm := make([]uint16, 2*cfg.FFN*cfg.Hidden)
	for j := 0; j < cfg.FFN; j++ {
		copy(nm[2*j*cfg.Hidden:(2*j+1)*cfg.Hidden], up.Half[j*cfg.Hidden:(j+1)*cfg.Hidden])
		for k := 0; k < cfg.Hidden; k++ {
			nm[(2*j+1)*cfg.Hidden+k] = down.Half[k*cfg.FFN+j]
		}
	}
	rows := &kernels.Mat{DType: kernels.F16, Out: 2 * cfg.FFN, In: cfg.Hidden, Half: nm}
	cols := &kernels.Mat{DType: kernels.F16, Out: cfg.Hidden, In: 2 * cfg.FFN, Transposed: true, Half: nm}
	// The dense block runs as the engine runs it: on the panel copies
	// engine.Load makes (the sparse block's scattered rows do not use them).
	up.Panels, down.Panels = kernels.PackPanels(up), kernels.PackPanels(down)
	hid, y := make([]float32, cfg.FFN), make([]float32, cfg.Hidden)
	b.Run("dense", func(b *testing.B) {
		for range b.N {
			kernels.Linear(hid, x, 1, up, nil, 1)
			kernels.ReLU(hid)
			kernels.Linear(y, hid, 1, down, nil, 1)
		}
	})
	// The sparse block runs as the build's hook runs it: the predictor on
	// the panel copies Build packed, top-k into reused scratch.
	u := Unit{0, MLP}
	p := bld.Predictor(u)
	sc := bld.scorer(u)
	scores, ph, live := make([]float32, cfg.FFN), make([]float32, p.Rank), make([]int32, p.Rank)
	order := make([]uint64, 2*cfg.FFN)
	k := bld.Rule(u).K
	idx := make([]int32, 0, cfg.FFN)
	upIdx, downIdx := make([]int32, cfg.FFN), make([]int32, cfg.FFN)
	// Once, untimed: the copy gives the separate matrices' bits.
	sc.scores(scores, ph, live, x, 1)
	idx = topKInto(idx, order, scores, k)
	for r, j := range idx {
		upIdx[r], downIdx[r] = 2*j, 2*j+1
	}
	want, got := make([]float32, cfg.Hidden), make([]float32, cfg.Hidden)
	kernels.LinearGather(hid[:k], x, up, nil, idx)
	kernels.ReLU(hid[:k])
	kernels.LinearScatterIn(want, hid[:k], down, nil, idx)
	kernels.LinearGather(hid[:k], x, rows, nil, upIdx[:k])
	kernels.ReLU(hid[:k])
	if !cols.Finite() {
		b.Fatal("synthetic weights with an infinity")
	}
	hk, dk := kernels.DropZeroInputs(hid[:k], downIdx[:k], downIdx[:k])
	b.Logf("%d of %d kept neurons are zero after ReLU (dropped before the down product)", k-len(hk), k)
	kernels.LinearScatterIn(got, hk, cols, nil, dk)
	if !slices.Equal(want, got) {
		b.Fatal("the neuron-major copy, zeros dropped, does not give the separate matrices' result")
	}
	b.Run("keep10", func(b *testing.B) {
		for range b.N {
			sc.scores(scores, ph, live, x, 1)
			idx = topKInto(idx, order, scores, k)
			for r, j := range idx { // the engine's neuronRows.index
				upIdx[r], downIdx[r] = 2*j, 2*j+1
			}
			kernels.LinearGather(hid[:k], x, rows, nil, upIdx[:k])
			kernels.ReLU(hid[:k])
			hk, dk := kernels.DropZeroInputs(hid[:k], downIdx[:k], downIdx[:k]) // the engine's mlpRow
			kernels.LinearScatterIn(y, hk, cols, nil, dk)
		}
	})
}

// decodeCase is one side of the decode benchmarks: its name and how to make
// its hook (nil for dense).
type decodeCase struct {
	name string
	hook func() engine.Hook
}

// decodeCases are the decode benchmarks' two sides: dense, and predictors
// keeping 10% of the MLP neurons and 50% of the heads.
func decodeCases(b *testing.B, m *engine.Model) []decodeCase {
	return []decodeCase{
		{"dense", func() engine.Hook { return nil }},
		{"mlp10_heads50", func() engine.Hook { return predictorBuild(b, m, 0.1, 0.5).Hook(HookOptions{}) }},
	}
}

// BenchmarkDecodeStep times whole decode steps (after a 64-token prompt)
// through the engine: dense, and with 10% of the MLP neurons and 50% of the
// heads kept by predictors (their cost included).
func BenchmarkDecodeStep(b *testing.B) {
	m := benchModel(b)
	for _, c := range decodeCases(b, m) {
		b.Run(c.name, func(b *testing.B) {
			hook := c.hook()
			prompt := make([]int, 64)
			for i := range prompt {
				prompt[i] = (i*7919 + 13) % m.Config.VocabSize
			}
			logits := make([]float32, m.Config.VocabSize)
			b.ResetTimer()
			for range b.N {
				b.StopTimer()
				s := m.NewSession()
				if _, err := m.Forward([]*engine.Session{s}, [][]int{prompt}, hook); err != nil {
					b.Fatal(err)
				}
				b.StartTimer()
				for step := range 8 {
					h, err := m.Forward([]*engine.Session{s}, [][]int{{(step*31 + 5) % m.Config.VocabSize}}, hook)
					if err != nil {
						b.Fatal(err)
					}
					m.Logits(logits, h, 1)
				}
				s.Close()
			}
			b.ReportMetric(float64(8*b.N)/b.Elapsed().Seconds(), "tok/s")
		})
	}
}

// BenchmarkDecodeSteady times single-token steps with nothing else between
// them: each session decodes 64 tokens from an empty cache (no prompt), then
// the next starts, so the timed loop is decode alone, dense and with the
// same predictors as BenchmarkDecodeStep. It shows the steady decode ratio,
// which BenchmarkDecodeStep's untimed prompts between its steps disturb (a
// prefill leaves the caches and the collector in another state); the
// issue's figure remains BenchmarkDecodeStep's.
func BenchmarkDecodeSteady(b *testing.B) {
	m := benchModel(b)
	for _, c := range decodeCases(b, m) {
		b.Run(c.name, func(b *testing.B) {
			hook := c.hook()
			logits := make([]float32, m.Config.VocabSize)
			var s *engine.Session
			b.ResetTimer()
			for i := range b.N {
				if i%64 == 0 {
					if s != nil {
						s.Close()
					}
					s = m.NewSession()
				}
				h, err := m.Forward([]*engine.Session{s}, [][]int{{(i*31 + 5) % m.Config.VocabSize}}, hook)
				if err != nil {
					b.Fatal(err)
				}
				m.Logits(logits, h, 1)
			}
			b.StopTimer()
			s.Close()
			b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "tok/s")
		})
	}
}

// BenchmarkPrefillSparse times prefill of 1, 8, 64 and 512 tokens, dense and
// with 10% MLP / 50% heads kept: as the batch grows, the engine switches
// blocks to dense products once rows keep most neurons, so sparse prefill
// never falls far behind dense.
func BenchmarkPrefillSparse(b *testing.B) {
	m := benchModel(b)
	for _, n := range []int{1, 8, 64, 512} {
		for _, c := range []struct {
			name string
			hook func() engine.Hook
		}{
			{"dense", func() engine.Hook { return nil }},
			{"mlp10_heads50", func() engine.Hook { return predictorBuild(b, m, 0.1, 0.5).Hook(HookOptions{}) }},
		} {
			b.Run(fmt.Sprintf("%d/%s", n, c.name), func(b *testing.B) {
				hook := c.hook()
				toks := make([]int, n)
				for i := range toks {
					toks[i] = (i*7919 + 13) % m.Config.VocabSize
				}
				b.ResetTimer() // building the hook hashes the base
				for range b.N {
					s := m.NewSession()
					if _, err := m.Forward([]*engine.Session{s}, [][]int{toks}, hook); err != nil {
						b.Fatal(err)
					}
					s.Close() // its key/value memory goes to the next NewSession, as in Generate
				}
				b.ReportMetric(float64(n*b.N)/b.Elapsed().Seconds(), "tok/s")
			})
		}
	}
}

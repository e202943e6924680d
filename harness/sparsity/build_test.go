package sparsity

import (
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
	"sparsegate/harness/kernels"
	"sparsegate/harness/synth"
)

var testFamilies = []checkpoint.Family{checkpoint.OPT, checkpoint.GPT2, checkpoint.Llama}

// A fixture is a synthetic dense base on disk, loaded, plus a place for builds.
type fixture struct {
	t       testing.TB
	root    string
	baseDir string
	cfg     *checkpoint.Config
	sha     string
	base    *engine.Model
	builds  int
}

// newFixture writes a tiny synthetic base of family f (edit may change its
// weights) and loads it single-threaded.
func newFixture(t testing.TB, f checkpoint.Family, edit func(string, []float32)) *fixture {
	t.Helper()
	fx := &fixture{t: t, root: t.TempDir()}
	fx.baseDir = filepath.Join(fx.root, "base")
	require.NoError(t, synth.Write(fx.baseDir, synth.Tiny(f), synth.Options{Seed: 11, Edit: edit}))
	m, err := engine.Load(fx.baseDir, engine.Options{Threads: 1})
	require.NoError(t, err)
	t.Cleanup(func() { m.Close() })
	fx.base, fx.cfg = m, m.Config
	fx.sha, err = m.Weights().SHA256()
	require.NoError(t, err)
	return fx
}

// manifest builds a manifest for the base with rule(u) for every unit.
func (fx *fixture) manifest(rule func(u Unit) Rule) *Manifest {
	m := &Manifest{Base: Base{Path: "../../base", SHA256: fx.sha}}
	for l := 0; l < fx.cfg.Layers; l++ {
		m.Layers = append(m.Layers, LayerRules{Layer: l, MLP: rule(Unit{l, MLP}), Attention: rule(Unit{l, Attention})})
	}
	return m
}

// write saves m (and preds, when any) as a new build directory.
func (fx *fixture) write(m *Manifest, preds map[Unit]*Predictor) string {
	fx.t.Helper()
	fx.builds++
	dir := filepath.Join(fx.root, "builds", "b"+string(rune('a'+fx.builds)))
	require.NoError(fx.t, os.MkdirAll(dir, 0o755))
	if len(preds) > 0 {
		if m.Predictors == "" {
			m.Predictors = "predictors.safetensors"
		}
		require.NoError(fx.t, WritePredictors(filepath.Join(dir, m.Predictors), preds))
	}
	require.NoError(fx.t, m.Save(dir))
	return dir
}

// open opens a build directory, failing the test on error.
func (fx *fixture) open(dir string) *Build {
	fx.t.Helper()
	b, err := Open(dir, OpenOptions{Engine: engine.Options{Threads: 1}})
	require.NoError(fx.t, err)
	fx.t.Cleanup(func() { b.Close() })
	return b
}

func (fx *fixture) width(u Unit) int { return unitWidth(fx.cfg, u.Component) }

// lpTokens is a fixed token sequence for the tiny vocabulary.
func lpTokens(n, seed int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = (i*37 + seed*13 + 3) % 96
	}
	return s
}

// randomPredictor draws a seeded predictor of the given shape.
func randomPredictor(in, rank, out int, seed uint64) *Predictor {
	r := rand.New(rand.NewPCG(seed, 0xb11d))
	p := NewPredictor(in, rank, out)
	for _, v := range [][]float32{p.W1, p.B1, p.W2, p.B2} {
		for i := range v {
			v[i] = float32(r.NormFloat64() / math.Sqrt(float64(in)))
		}
	}
	return p
}

// errorFixture is a build using every mode, written to disk, whose manifest
// the error tests edit. Layout of the saved manifest (line numbers matter):
//
//	 9: layer 0 mlp: threshold; 10: layer 0 attention: oracle k=2
//	14: layer 1 mlp: predictor previous; 15: layer 1 attention: static
func errorFixture(t *testing.T) (*fixture, string, map[Unit]*Predictor) {
	fx := newFixture(t, checkpoint.OPT, nil)
	rules := map[Unit]Rule{
		{0, MLP}:       {Mode: Threshold, Threshold: 0.5, On: OnInput},
		{0, Attention}: {Mode: Oracle, K: 2},
		{1, MLP}:       {Mode: PredictorMode, K: 16, Rank: 4, Input: InputPrevious, Calibration: &Calibration{Recall: 0.75, KeptFraction: 0.25, Tokens: 100}},
		{1, Attention}: {Mode: Static, Keep: []int{0, 2}},
	}
	m := fx.manifest(func(u Unit) Rule { return rules[u] })
	preds := map[Unit]*Predictor{{1, MLP}: randomPredictor(32, 4, 64, 1)}
	dir := fx.write(m, preds)
	fx.open(dir) // the unedited build is valid
	return fx, dir, preds
}

func TestOpenRefusesBadBuilds(t *testing.T) {
	fx, dir, preds := errorFixture(t)
	path := filepath.Join(dir, ManifestFile)
	orig, err := os.ReadFile(path)
	require.NoError(t, err)
	predFile := filepath.Join(dir, "predictors.safetensors")
	origPred, err := os.ReadFile(predFile)
	require.NoError(t, err)
	writePredParts := func(edit func(name string, nt *checkpoint.NamedTensor)) {
		var ts []checkpoint.NamedTensor
		p := preds[Unit{1, MLP}]
		for _, part := range []struct {
			name  string
			v     []float32
			shape []int
		}{{"w1", p.W1, []int{4, 32}}, {"b1", p.B1, []int{4}}, {"w2", p.W2, []int{64, 4}}, {"b2", p.B2, []int{64}}} {
			nt := checkpoint.NamedTensor{Name: PredictorTensorName(Unit{1, MLP}, part.name), DType: checkpoint.F32, Shape: part.shape, Data: checkpoint.EncodeF32(part.v)}
			edit(part.name, &nt)
			if nt.Name != "" {
				ts = append(ts, nt)
			}
		}
		require.NoError(t, checkpoint.Write(predFile, ts, nil))
	}
	cases := []struct {
		name string
		old  string // replaced in the manifest text (must occur)
		new  string
		pred func() // or: edit the predictor file
		want []string
	}{
		{name: "syntax", old: `"version": 1,`, new: `"version": 1,,`, want: []string{"manifest.json:3:", "invalid JSON"}},
		{name: "unknown field", old: `"k":2`, new: `"kay":2`, want: []string{"manifest.json:10:", `"layers[0].attention.kay": unknown field`, "allowed here:"}},
		{name: "unknown top field", old: `"version": 1,`, new: `"version": 1, "extra": true,`, want: []string{"manifest.json:3:", `"extra": unknown field`}},
		{name: "wrong type", old: `"k":2`, new: `"k":"two"`, want: []string{"manifest.json:10:", "wrong type"}},
		{name: "unknown mode", old: `"mode":"oracle","k":2`, new: `"mode":"topk"`, want: []string{"manifest.json:10:", "layer 0 attention", `mode "topk" is unknown`, "dense, oracle"}},
		{name: "missing k", old: `"mode":"oracle","k":2`, new: `"mode":"oracle"`, want: []string{"layer 0 attention", `mode oracle needs field "k"`}},
		{name: "field of another mode", old: `"mode":"oracle","k":2`, new: `"mode":"oracle","k":2,"rank":3`, want: []string{"layer 0 attention", "does not use rank"}},
		{name: "layer twice", old: `"layer": 1,`, new: `"layer": 0,`, want: []string{"layer 0: listed twice", "layer 1: missing"}},
		{name: "layer outside base", old: `"layer": 1,`, new: `"layer": 2,`, want: []string{"layer 2 does not exist; the base has layers 0 to 1", "layer 1: missing"}},
		{name: "k zero", old: `"k":2`, new: `"k":0`, want: []string{"layer 0 attention: k 0 is out of range; set k between 1 and 4"}},
		{name: "k above width", old: `"k":16`, new: `"k":65`, want: []string{"layer 1 mlp: k 65 is out of range; set k between 1 and 64"}},
		{name: "static out of range", old: `"keep":[0,2]`, new: `"keep":[0,4]`, want: []string{"manifest.json:15:", "layer 1 attention: keep[1] = 4 is out of range"}},
		{name: "static not ascending", old: `"keep":[0,2]`, new: `"keep":[2,0]`, want: []string{"keep[1] = 0 follows 2"}},
		{name: "static duplicate", old: `"keep":[0,2]`, new: `"keep":[2,2]`, want: []string{"keep[1] = 2 appears twice"}},
		{name: "static null", old: `"keep":[0,2]`, new: `"keep":null`, want: []string{"layer 1 attention", `needs field "keep"`}},
		{name: "threshold on attention", old: `"mode":"oracle","k":2`, new: `"mode":"threshold","threshold":1,"on":"activation"`, want: []string{"layer 0 attention: mode threshold applies to the mlp only"}},
		{name: "threshold on what", old: `"on":"input"`, new: `"on":"output"`, want: []string{"layer 0 mlp", `on "output" is unknown`}},
		{name: "previous at layer 0", old: `"mode":"threshold","threshold":0.5,"on":"input"`, new: `"mode":"predictor","k":4,"rank":4,"input":"previous"`, want: []string{"layer 0 mlp", "impossible at layer 0"}},
		{name: "calibration range", old: `"recall":0.75`, new: `"recall":1.5`, want: []string{"layer 1 mlp", "calibration recall 1.5 must lie in [0, 1]"}},
		{name: "newer version", old: `"version": 1,`, new: `"version": 2,`, want: []string{"format version 2 was written by a newer sparsegate; this sparsegate reads version 1"}},
		{name: "wrong format", old: `"sparsegate-build"`, new: `"other"`, want: []string{`format "other" is not a sparsegate build manifest`}},
		{name: "base missing", old: `"../../base"`, new: `"../../nowhere"`, want: []string{"base: directory", "nowhere", "does not exist; fix base.path"}},
		{name: "hash differs", old: fx.sha, new: strings.Repeat("ab", 32), want: []string{"manifest.json:4:", "have sha256 " + fx.sha, "records " + strings.Repeat("ab", 32)}},
		{name: "hash malformed", old: fx.sha, new: "abc", want: []string{`sha256 "abc" is not a 64-digit`}},
		{name: "predictors missing", pred: func() { require.NoError(t, os.Remove(predFile)) }, want: []string{"predictors: file", "does not exist"}},
		{name: "tensor missing", pred: func() {
			writePredParts(func(p string, nt *checkpoint.NamedTensor) {
				if p == "b2" {
					nt.Name = ""
				}
			})
		}, want: []string{"manifest.json:14:", "layer 1 mlp", `tensor "layers.1.mlp.b2" is missing`}},
		{name: "tensor shape", old: `"rank":4`, new: `"rank":5`, want: []string{`tensor "layers.1.mlp.w1" has shape [4 32], but rank 5 needs [5 32]`}},
		{name: "tensor dtype", pred: func() {
			writePredParts(func(p string, nt *checkpoint.NamedTensor) {
				if p == "b1" {
					nt.DType, nt.Data = checkpoint.F16, make([]byte, 8)
				}
			})
		}, want: []string{`tensor "layers.1.mlp.b1" is F16; predictor matrices must be F16 or F32 and biases F32`}},
		{name: "tensor dtype matrix", pred: func() {
			writePredParts(func(p string, nt *checkpoint.NamedTensor) {
				if p == "w2" {
					nt.DType, nt.Data = checkpoint.BF16, make([]byte, 2*64*4)
				}
			})
		}, want: []string{`tensor "layers.1.mlp.w2" is BF16; predictor matrices must be F16 or F32 and biases F32`}},
		{name: "tensor NaN", pred: func() {
			writePredParts(func(p string, nt *checkpoint.NamedTensor) {
				if p == "w2" {
					v := append([]float32{}, preds[Unit{1, MLP}].W2...)
					v[5] = float32(math.NaN())
					nt.Data = checkpoint.EncodeF32(v)
				}
			})
		}, want: []string{"layer 1 mlp", "predictor w2 holds a non-finite value at element 5"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			require.NoError(t, os.WriteFile(path, orig, 0o644))
			require.NoError(t, os.WriteFile(predFile, origPred, 0o644))
			if c.pred != nil {
				c.pred()
			} else {
				require.Contains(t, string(orig), c.old, "the case's text must occur in the manifest")
				require.NoError(t, os.WriteFile(path, []byte(strings.Replace(string(orig), c.old, c.new, 1)), 0o644))
			}
			_, err := Open(dir, OpenOptions{Engine: engine.Options{Threads: 1}})
			require.Error(t, err)
			for _, w := range c.want {
				require.Contains(t, err.Error(), w)
			}
			require.Contains(t, err.Error(), path, "the error names the manifest file")
		})
	}
}

func TestOpenChecksLayerCount(t *testing.T) {
	fx := newFixture(t, checkpoint.GPT2, nil)
	m := fx.manifest(func(Unit) Rule { return Rule{Mode: Dense} })
	m.Layers = m.Layers[:1]
	_, err := Open(fx.write(m, nil), OpenOptions{})
	require.ErrorContains(t, err, "1 layers listed but the base config.json has 2; list every layer exactly once")
	require.ErrorContains(t, err, "layer 1: missing")
}

func TestBuildAccessors(t *testing.T) {
	fx, dir, preds := errorFixture(t)
	b := fx.open(dir)
	require.Equal(t, []Unit{{0, MLP}, {0, Attention}, {1, MLP}, {1, Attention}}, b.Units())
	require.Equal(t, "layer 1 mlp", Unit{1, MLP}.String())
	require.Equal(t, preds[Unit{1, MLP}], b.Predictor(Unit{1, MLP}))
	require.Nil(t, b.Predictor(Unit{0, MLP}))
	require.Equal(t, Rule{Mode: Static, Keep: []int{0, 2}}, b.Rule(Unit{1, Attention}))
	require.Equal(t, 64, b.Width(Unit{0, MLP}))
	require.Equal(t, 4, b.Width(Unit{0, Attention}))
	require.Len(t, b.Layers(), 2)
	require.Equal(t, fx.sha, b.Manifest.Base.SHA256)
	_, err := b.StaticKeep()
	require.ErrorContains(t, err, "layer 0 mlp: mode threshold chooses units per token")

	// With units set dense, Units leaves them out.
	m := fx.manifest(func(u Unit) Rule {
		if u == (Unit{1, Attention}) {
			return Rule{Mode: Static, Keep: []int{1}}
		}
		return Rule{Mode: Dense}
	})
	b2, err := New(fx.base, m, nil)
	require.NoError(t, err)
	require.Equal(t, []Unit{{1, Attention}}, b2.Units())
	keep, err := b2.StaticKeep()
	require.NoError(t, err)
	require.Equal(t, map[Unit][]int{{1, Attention}: {1}}, keep)
	require.NoError(t, b2.Close()) // does not close the shared base
	_, err = fx.base.LogProbs(lpTokens(4, 1), nil)
	require.NoError(t, err)
}

func TestNewChecksPredictors(t *testing.T) {
	fx := newFixture(t, checkpoint.Llama, nil)
	m := fx.manifest(func(u Unit) Rule {
		if u == (Unit{0, Attention}) {
			return Rule{Mode: PredictorMode, K: 2, Rank: 3, Input: InputSelf}
		}
		return Rule{Mode: Dense}
	})
	_, err := New(fx.base, m, nil)
	require.ErrorContains(t, err, "needs the manifest's \"predictors\" file")
	m.Predictors = "p.safetensors"
	_, err = New(fx.base, m, nil)
	require.ErrorContains(t, err, "layer 0 attention: mode predictor but no predictor weights")
	_, err = New(fx.base, m, map[Unit]*Predictor{{0, Attention}: randomPredictor(32, 3, 64, 1)})
	require.ErrorContains(t, err, "predictor shape 32→3→64, but the rule needs 32→3→4")
	_, err = New(fx.base, m, map[Unit]*Predictor{{0, Attention}: randomPredictor(32, 3, 4, 1)})
	require.NoError(t, err)
}

func TestPredictorFileRoundTrip(t *testing.T) {
	path := filepath.Join(t.TempDir(), "p.safetensors")
	preds := map[Unit]*Predictor{{2, Attention}: randomPredictor(8, 2, 4, 1), {0, MLP}: randomPredictor(8, 3, 16, 2)}
	require.NoError(t, WritePredictors(path, preds))
	f, err := checkpoint.Open(path)
	require.NoError(t, err)
	defer f.Close()
	var names []string
	for _, tn := range f.Tensors() {
		names = append(names, tn.Name)
		require.Equal(t, checkpoint.F32, tn.DType)
	}
	require.Equal(t, []string{"layers.0.mlp.w1", "layers.0.mlp.b1", "layers.0.mlp.w2", "layers.0.mlp.b2",
		"layers.2.attention.w1", "layers.2.attention.b1", "layers.2.attention.w2", "layers.2.attention.b2"}, names)
	w2, ok := f.Tensor("layers.2.attention.w2")
	require.True(t, ok)
	require.Equal(t, []int{4, 2}, w2.Shape)
	v, err := w2.Float32s()
	require.NoError(t, err)
	require.Equal(t, preds[Unit{2, Attention}].W2, v)

	bad := randomPredictor(8, 2, 4, 3)
	bad.B1[1] = float32(math.Inf(1))
	err = WritePredictors(path, map[Unit]*Predictor{{1, MLP}: bad})
	require.ErrorContains(t, err, "layer 1 mlp: predictor b1 holds a non-finite value at element 1")
}

// A predictor rounded to binary16 is written with F16 matrices (F32 biases),
// opens to the same values, scores with binary16 panels, and its hook gives
// Predictor.Scores bit for bit; an unrounded one stays F32 throughout. A
// weight past the binary16 range leaves the predictor unrounded.
func TestHalfPredictorsRoundTrip(t *testing.T) {
	fx := newFixture(t, checkpoint.OPT, nil)
	half := randomPredictor(32, 4, 64, 21)
	orig := half.clone()
	require.True(t, half.RoundToHalf())
	require.NotEqual(t, orig.W1, half.W1, "rounding changed some weights")
	require.Equal(t, orig.B2, half.B2, "biases stay float32")
	full := randomPredictor(32, 4, 64, 22)
	preds := map[Unit]*Predictor{{0, MLP}: half, {1, MLP}: full}
	dir := fx.write(mlpPredictorManifest(fx, 4), preds)
	f, err := checkpoint.Open(filepath.Join(dir, "predictors.safetensors"))
	require.NoError(t, err)
	dtypes := map[string]checkpoint.DType{}
	for _, tn := range f.Tensors() {
		dtypes[tn.Name] = tn.DType
	}
	f.Close()
	require.Equal(t, map[string]checkpoint.DType{
		"layers.0.mlp.w1": checkpoint.F16, "layers.0.mlp.b1": checkpoint.F32,
		"layers.0.mlp.w2": checkpoint.F16, "layers.0.mlp.b2": checkpoint.F32,
		"layers.1.mlp.w1": checkpoint.F32, "layers.1.mlp.b1": checkpoint.F32,
		"layers.1.mlp.w2": checkpoint.F32, "layers.1.mlp.b2": checkpoint.F32,
	}, dtypes)

	b := fx.open(dir)
	for u, want := range preds {
		got := b.Predictor(u)
		require.Equal(t, want.W1, got.W1, "%s", u)
		require.Equal(t, want.W2, got.W2, "%s", u)
		sm := b.scoring[u]
		wantDT := kernels.F32
		if u.Layer == 0 {
			wantDT = kernels.F16
		}
		require.Equal(t, wantDT, sm[0].DType, "%s", u)
		require.Equal(t, wantDT, sm[1].DType, "%s", u)
		x := make([]float32, 32)
		for i := range x {
			x[i] = float32(i%5) - 1.5
		}
		want, hidden := make([]float32, 64), make([]float32, 4)
		got.Scores(want, hidden, x)
		sc := b.scorer(u)
		mine := make([]float32, 64)
		sc.scores(mine, hidden, make([]int32, len(hidden)), x, 2)
		require.Equal(t, want, mine, "%s: scores from the scoring matrices", u)
	}

	big := randomPredictor(32, 4, 64, 23)
	big.W2[3] = 1e6
	kept := big.clone()
	require.False(t, big.RoundToHalf())
	require.Equal(t, kept, big)
}

// The scorer runs a predictor's second product over the hidden units ReLU
// left non-zero only, from its input-major copy, with Predictor.Scores's
// bits, for a binary16 predictor and an unrounded (float32) one. Rank 64:
// about half the hidden units are zero.
func TestScorerSkipsZeroHiddenUnits(t *testing.T) {
	fx := newFixture(t, checkpoint.OPT, nil)
	half := randomPredictor(32, 64, 64, 31)
	require.True(t, half.RoundToHalf())
	full := randomPredictor(32, 64, 64, 32)
	preds := map[Unit]*Predictor{{0, MLP}: half, {1, MLP}: full}
	b := fx.open(fx.write(mlpPredictorManifest(fx, 64), preds))
	r := rand.New(rand.NewPCG(33, 34))
	zeros := 0
	for _, u := range []Unit{{0, MLP}, {1, MLP}} {
		sc := b.scorer(u)
		require.True(t, sc.w2.Transposed, "%s: the second product's input-major copy", u)
		wantDT := kernels.F32 // layer 1's predictor is not rounded
		if u.Layer == 0 {
			wantDT = kernels.F16
		}
		require.Equal(t, wantDT, sc.w2.DType, "%s", u)
		for range 20 {
			x := make([]float32, 32)
			for i := range x {
				x[i] = float32(r.NormFloat64())
			}
			want, hidden := make([]float32, 64), make([]float32, 64)
			b.Predictor(u).Scores(want, hidden, x)
			for _, v := range hidden {
				if v == 0 {
					zeros++
				}
			}
			got := make([]float32, 64)
			sc.scores(got, make([]float32, 64), make([]int32, 64), x, 2)
			require.Equal(t, -1, firstBitsDiff(want, got), "%s: first score whose bits differ from Predictor.Scores", u)
		}
	}
	require.Greater(t, zeros, 20*64/4, "too few zero hidden units to test the skip")
}

// firstBitsDiff returns the first index where a and b differ in bits, or -1.
func firstBitsDiff(a, b []float32) int {
	for i := range a {
		if math.Float32bits(a[i]) != math.Float32bits(b[i]) {
			return i
		}
	}
	return -1
}

// mlpPredictorManifest is fx's manifest with a rank-rank predictor keeping
// 8 neurons in every MLP and dense attention.
func mlpPredictorManifest(fx *fixture, rank int) *Manifest {
	return fx.manifest(func(u Unit) Rule {
		if u.Component == MLP {
			return Rule{Mode: PredictorMode, K: 8, Rank: rank, Input: InputSelf}
		}
		return Rule{Mode: Dense}
	})
}

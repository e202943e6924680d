package sparsity

import (
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/engine"
)

// refHook is a plain reference for the build's hook: it recomputes each
// rule from the engine's Token with the package's TopK and Predictor.Scores,
// allocating freely, so the hook's buffer reuse is checked against it.
type refHook struct {
	rule  func(Unit) Rule
	preds map[Unit]*Predictor
}

func (r *refHook) Heads(t *engine.Token) []int32   { return r.pick(Unit{t.Layer, Attention}, t) }
func (r *refHook) Neurons(t *engine.Token) []int32 { return r.pick(Unit{t.Layer, MLP}, t) }

func (r *refHook) pick(u Unit, t *engine.Token) []int32 {
	rule := r.rule(u)
	switch rule.Mode {
	case Oracle:
		d := t.Dense()
		mag := make([]float32, len(d))
		for i, v := range d {
			mag[i] = float32(math.Abs(float64(v)))
		}
		return TopK(nil, mag, rule.K)
	case Threshold:
		thr := rule.Threshold
		if rule.On == OnInput {
			var s float64
			for _, v := range t.Input {
				s += float64(v) * float64(v)
			}
			thr *= math.Sqrt(s / float64(len(t.Input)))
		}
		out := []int32{}
		for i, v := range t.Dense() {
			if math.Abs(float64(v)) > thr {
				out = append(out, int32(i))
			}
		}
		return out
	case PredictorMode:
		p := r.preds[u]
		x := t.Input
		if rule.Input == InputPrevious {
			x = t.PrevLayerInput
		}
		scores, hidden := make([]float32, p.Out), make([]float32, p.Rank)
		p.Scores(scores, hidden, x)
		return TopK(nil, scores, rule.K)
	case Static:
		out := make([]int32, len(rule.Keep))
		for i, v := range rule.Keep {
			out[i] = int32(v)
		}
		return out
	}
	return nil
}

// maskRule is a static mask that differs per layer: about 60% of the
// neurons and every other head (which ones depends on the layer).
func maskRule(fx *fixture) func(Unit) Rule {
	return func(u Unit) Rule {
		var keep []int
		for i := 0; i < fx.width(u); i++ {
			if u.Component == MLP && (i*7+u.Layer*3)%5 < 3 || u.Component == Attention && i%2 == u.Layer%2 {
				keep = append(keep, i)
			}
		}
		return Rule{Mode: Static, Keep: keep}
	}
}

// zeroEdit zeroes, in a synthetic checkpoint's f32 values, the weights of the
// units a static mask drops (the layouts as engine_test.go's zeroDropped
// documents them): MLP up (and gate) rows, up bias and down columns;
// attention query rows and bias and output columns.
func zeroEdit(cfg *checkpoint.Config, rule func(Unit) Rule) func(string, []float32) {
	d, hd, f := cfg.Hidden, cfg.HeadDim, cfg.FFN
	dropped := func(u Unit) []bool {
		w := unitWidth(cfg, u.Component)
		drop := make([]bool, w)
		for i := range drop {
			drop[i] = true
		}
		for _, k := range rule(u).Keep {
			drop[k] = false
		}
		return drop
	}
	return func(name string, v []float32) {
		var l int
		rest := ""
		for _, p := range []string{"layers.", "h."} {
			if i := strings.Index(name, p); i >= 0 && (i == 0 || name[i-1] == '.') {
				var n int
				for n = i + len(p); name[n] != '.'; n++ {
					l = l*10 + int(name[n]-'0')
				}
				rest = name[n+1:]
				break
			}
		}
		if rest == "" {
			return
		}
		dn, dh := dropped(Unit{l, MLP}), dropped(Unit{l, Attention})
		hq := func(j int) bool { return dh[j/hd] } // query-space index → head dropped
		q := cfg.Heads * hd
		switch rest {
		case "fc1.weight", "mlp.up_proj.weight", "mlp.gate_proj.weight": // [f, d]
			for r := 0; r < f; r++ {
				if dn[r] {
					clear(v[r*d : (r+1)*d])
				}
			}
		case "fc1.bias", "mlp.c_fc.bias":
			for r := 0; r < f; r++ {
				if dn[r] {
					v[r] = 0
				}
			}
		case "fc2.weight", "mlp.down_proj.weight": // [d, f]
			for r := 0; r < d; r++ {
				for c := 0; c < f; c++ {
					if dn[c] {
						v[r*f+c] = 0
					}
				}
			}
		case "mlp.c_fc.weight": // [d, f], Conv1D
			for r := 0; r < d; r++ {
				for c := 0; c < f; c++ {
					if dn[c] {
						v[r*f+c] = 0
					}
				}
			}
		case "mlp.c_proj.weight": // [f, d], Conv1D
			for r := 0; r < f; r++ {
				if dn[r] {
					clear(v[r*d : (r+1)*d])
				}
			}
		case "self_attn.q_proj.weight": // [H·hd, d]
			for r := 0; r < q; r++ {
				if hq(r) {
					clear(v[r*d : (r+1)*d])
				}
			}
		case "self_attn.q_proj.bias":
			for r := 0; r < q; r++ {
				if hq(r) {
					v[r] = 0
				}
			}
		case "self_attn.out_proj.weight", "self_attn.o_proj.weight": // [d, H·hd]
			for r := 0; r < d; r++ {
				for c := 0; c < q; c++ {
					if hq(c) {
						v[r*q+c] = 0
					}
				}
			}
		case "attn.c_attn.weight": // [d, 3d], queries in columns [0, d)
			for r := 0; r < d; r++ {
				for c := 0; c < d; c++ {
					if hq(c) {
						v[r*3*d+c] = 0
					}
				}
			}
		case "attn.c_attn.bias":
			for c := 0; c < d; c++ {
				if hq(c) {
					v[c] = 0
				}
			}
		case "attn.c_proj.weight": // [d(in), d(out)]
			for r := 0; r < d; r++ {
				if hq(r) {
					clear(v[r*d : (r+1)*d])
				}
			}
		}
	}
}

// requireRelClose checks |a−b| ≤ rel·max(|a|,|b|) elementwise.
func requireRelClose(t *testing.T, want, got []float64, rel float64) {
	t.Helper()
	require.Len(t, got, len(want))
	for i := range want {
		tol := rel * math.Max(math.Abs(want[i]), math.Abs(got[i]))
		require.InDelta(t, want[i], got[i], tol, "position %d", i)
	}
}

func TestKeepEverythingIsTheDensePath(t *testing.T) {
	for _, f := range testFamilies {
		t.Run(string(f), func(t *testing.T) {
			fx := newFixture(t, f, nil)
			toks := lpTokens(23, 1)
			dense, err := fx.base.LogProbs(toks, nil)
			require.NoError(t, err)
			all := func(u Unit) Rule {
				keep := make([]int, fx.width(u))
				for i := range keep {
					keep[i] = i
				}
				return Rule{Mode: Static, Keep: keep}
			}
			oracle := func(u Unit) Rule { return Rule{Mode: Oracle, K: fx.width(u)} }
			for name, rule := range map[string]func(Unit) Rule{"static": all, "oracle": oracle} {
				b := fx.open(fx.write(fx.manifest(rule), nil))
				got, err := fx.base.LogProbs(toks, b.Hook(HookOptions{}))
				require.NoError(t, err)
				require.Equal(t, dense, got, name)
			}
		})
	}
}

func TestStaticMaskEqualsZeroedWeights(t *testing.T) {
	for _, f := range testFamilies {
		t.Run(string(f), func(t *testing.T) {
			fx := newFixture(t, f, nil)
			rule := maskRule(fx)
			b := fx.open(fx.write(fx.manifest(rule), nil))
			toks := lpTokens(19, 2)
			sparse, err := fx.base.LogProbs(toks, b.Hook(HookOptions{}))
			require.NoError(t, err)
			dense, err := fx.base.LogProbs(toks, nil)
			require.NoError(t, err)
			require.NotEqual(t, dense, sparse, "the mask must change the function")
			zeroed := newFixture(t, f, zeroEdit(fx.cfg, rule))
			want, err := zeroed.base.LogProbs(toks, nil)
			require.NoError(t, err)
			requireRelClose(t, want, sparse, 1e-5)
		})
	}
}

func TestForcingAUnitDenseRestoresExactlyThatUnit(t *testing.T) {
	for _, f := range testFamilies {
		t.Run(string(f), func(t *testing.T) {
			fx := newFixture(t, f, nil)
			rule := maskRule(fx)
			toks := lpTokens(17, 3)
			b := fx.open(fx.write(fx.manifest(rule), nil))
			masked, err := fx.base.LogProbs(toks, b.Hook(HookOptions{}))
			require.NoError(t, err)
			for _, u := range []Unit{{0, Attention}, {1, MLP}} {
				forced, err := fx.base.LogProbs(toks, b.Hook(HookOptions{Dense: map[Unit]bool{u: true}}))
				require.NoError(t, err)
				edited := fx.open(fx.write(fx.manifest(func(v Unit) Rule {
					if v == u {
						return Rule{Mode: Dense}
					}
					return rule(v)
				}), nil))
				want, err := fx.base.LogProbs(toks, edited.Hook(HookOptions{}))
				require.NoError(t, err)
				require.Equal(t, want, forced, "%s forced dense", u)
				require.NotEqual(t, masked, forced, "%s forced dense", u)
			}
		})
	}
}

// Every mode, run through the engine, picks what the reference hook picks:
// identical log-probabilities bit for bit.
func TestHookMatchesReference(t *testing.T) {
	for _, f := range testFamilies {
		t.Run(string(f), func(t *testing.T) {
			fx := newFixture(t, f, nil)
			rules := map[Unit]Rule{
				{0, MLP}:       {Mode: PredictorMode, K: 20, Rank: 6, Input: InputSelf},
				{0, Attention}: {Mode: Oracle, K: 2},
				{1, MLP}:       {Mode: Threshold, Threshold: 0.05, On: OnInput},
				{1, Attention}: {Mode: PredictorMode, K: 3, Rank: 5, Input: InputPrevious},
			}
			preds := map[Unit]*Predictor{{0, MLP}: randomPredictor(32, 6, 64, 4), {1, Attention}: randomPredictor(32, 5, 4, 5)}
			rule := func(u Unit) Rule { return rules[u] }
			b := fx.open(fx.write(fx.manifest(rule), preds))
			ref := &refHook{rule: rule, preds: preds}
			// A batch of sequences: the hook keeps each row's heads apart.
			seqs := [][]int{lpTokens(15, 4), lpTokens(9, 5), lpTokens(21, 6)}
			want, err := fx.base.BatchLogProbs(seqs, ref)
			require.NoError(t, err)
			got, err := fx.base.BatchLogProbs(seqs, b.Hook(HookOptions{}))
			require.NoError(t, err)
			require.Equal(t, want, got)
			dense, err := fx.base.BatchLogProbs(seqs, nil)
			require.NoError(t, err)
			require.NotEqual(t, dense, got)
			// Threshold on activations, and the other thresholds measure.
			rules[Unit{1, MLP}] = Rule{Mode: Threshold, Threshold: 0.1, On: OnActivation}
			m2 := fx.manifest(rule)
			m2.Predictors = "p.safetensors"
			b2, err := New(fx.base, m2, preds)
			require.NoError(t, err)
			want, err = fx.base.BatchLogProbs(seqs, ref)
			require.NoError(t, err)
			got, err = fx.base.BatchLogProbs(seqs, b2.Hook(HookOptions{Recall: true, Stats: &Stats{}}))
			require.NoError(t, err)
			require.Equal(t, want, got)
		})
	}
}

// selectorFor builds a hook over a one-unit build and returns its selector.
func selectorFor(t *testing.T, rule Rule, pred *Predictor, stats *Stats, recall bool) (*hook, *selector) {
	fx := newFixture(t, checkpoint.OPT, nil)
	preds := map[Unit]*Predictor{}
	if pred != nil {
		preds[Unit{1, MLP}] = pred
	}
	m := fx.manifest(func(u Unit) Rule {
		if u == (Unit{1, MLP}) {
			return rule
		}
		return Rule{Mode: Dense}
	})
	m.Predictors = "p.safetensors"
	b, err := New(fx.base, m, preds)
	require.NoError(t, err)
	h := b.Hook(HookOptions{Stats: stats, Recall: recall}).(*hook)
	return h, &h.sel[1][MLP.index()]
}

func TestOracleAndThresholdPickByMagnitude(t *testing.T) {
	dense := make([]float32, 64)
	dense[3], dense[10], dense[11], dense[40], dense[63] = -5, 3, 3, 7, -0.5
	dense[20] = 2.875
	src := func() []float32 { return dense }
	input := make([]float32, 32)
	for i := range input {
		input[i] = 2 // rms 2
	}
	h, s := selectorFor(t, Rule{Mode: Oracle, K: 4}, nil, nil, false)
	// |7| at 40, |−5| at 3, the tie |3| at 10 and 11: both (k=4).
	require.Equal(t, []int32{3, 10, 11, 40}, h.choose(s, input, nil, src))
	s.rule.K = 3 // the tie goes to the lower index
	require.Equal(t, []int32{3, 10, 40}, h.choose(s, input, nil, src))

	s.rule = Rule{Mode: Threshold, Threshold: 2.875, On: OnActivation}
	require.Equal(t, []int32{3, 10, 11, 40}, h.choose(s, input, nil, src), "strictly above 2.875")
	s.rule = Rule{Mode: Threshold, Threshold: 1.4375, On: OnInput} // 1.4375 · rms 2 = 2.875, exactly
	require.Equal(t, []int32{3, 10, 11, 40}, h.choose(s, input, nil, src))
	s.rule = Rule{Mode: Threshold, Threshold: 10, On: OnActivation}
	got := h.choose(s, input, nil, src)
	require.NotNil(t, got, "an empty selection must not read as keep-all (nil)")
	require.Empty(t, got)
}

func TestPredictorPicksByItsScores(t *testing.T) {
	// A hand-made predictor: hidden = relu(x[0..3]), score j = hidden[j%4]·(j+1)/64 − bias.
	p := NewPredictor(32, 4, 64)
	for r := 0; r < 4; r++ {
		p.W1[r*32+r] = 1
	}
	for j := 0; j < 64; j++ {
		p.W2[j*4+j%4] = float32(j+1) / 64
	}
	p.B2[5] = 10 // unit 5 wins whatever the input
	x := make([]float32, 32)
	x[0], x[1], x[2], x[3] = 1, -1, 0.5, 0 // hidden = [1, 0, 0.5, 0]
	h, s := selectorFor(t, Rule{Mode: PredictorMode, K: 3, Rank: 4, Input: InputSelf}, p, nil, false)
	// Scores: unit 5 → 10+…; then j ≡ 0 mod 4 scores (j+1)/64 (60 → 61/64,
	// 56 → 57/64), j ≡ 2 mod 4 scores (j+1)/128 (62 → 63/128 < 57/64).
	got := h.choose(s, x, nil, func() []float32 { panic("a predictor must not ask for Dense") })
	require.Equal(t, []int32{5, 56, 60}, got)
	scores, hidden := make([]float32, 64), make([]float32, 4)
	p.Scores(scores, hidden, x)
	require.Equal(t, TopK(nil, scores, 3), got)
	mine := make([]float32, 64)
	s.pred.scores(mine, hidden, make([]int32, len(hidden)), x, 2)
	require.Equal(t, scores, mine, "the hook's scorer computes Predictor.Scores bit for bit")
	// input previous reads the other vector.
	s.rule.Input = InputPrevious
	got = h.choose(s, make([]float32, 32), x, nil)
	require.Equal(t, []int32{5, 56, 60}, got)
}

func TestTopKIntoMatchesTopK(t *testing.T) {
	vals := make([]float32, 97)
	for i := range vals {
		vals[i] = float32((i*53)%17) - 8 // many ties
	}
	order := make([]uint64, 2*len(vals))
	for k := 0; k <= len(vals); k += 7 {
		require.Equal(t, TopK(nil, vals, k), topKInto(nil, order, vals, k), "k=%d", k)
	}
	vals[4] = float32(math.NaN())
	require.NotContains(t, topKInto(nil, order, vals, 96), int32(4), "NaN ranks last")
}

func TestSelectorsDoNotAllocate(t *testing.T) {
	dense := make([]float32, 64)
	for i := range dense {
		dense[i] = float32((i*29)%31) - 15
	}
	src := func() []float32 { return dense }
	x := make([]float32, 32)
	for i := range x {
		x[i] = float32(i%5) - 2
	}
	for _, rule := range []Rule{
		{Mode: Oracle, K: 9},
		{Mode: Threshold, Threshold: 0.5, On: OnInput},
		{Mode: PredictorMode, K: 9, Rank: 4, Input: InputSelf},
		{Mode: Static, Keep: []int{1, 5, 9}},
	} {
		var p *Predictor
		if rule.Mode == PredictorMode {
			p = randomPredictor(32, 4, 64, 9)
		}
		h, s := selectorFor(t, rule, p, &Stats{}, true)
		h.choose(s, x, x, src) // first call may create the stats entry
		allocs := testing.AllocsPerRun(50, func() { h.choose(s, x, x, src) })
		require.Zero(t, allocs, "%s", rule)
	}
}

func TestStatsFromTheHook(t *testing.T) {
	fx := newFixture(t, checkpoint.Llama, nil)
	rules := map[Unit]Rule{
		{0, MLP}:       {Mode: Oracle, K: 16},
		{0, Attention}: {Mode: Static, Keep: []int{1, 2, 3}},
		{1, MLP}:       {Mode: Threshold, Threshold: 0.02, On: OnActivation},
		{1, Attention}: {Mode: Oracle, K: 1},
	}
	rule := func(u Unit) Rule { return rules[u] }
	b := fx.open(fx.write(fx.manifest(rule), nil))
	toks := lpTokens(25, 7)
	st := &Stats{}
	_, err := fx.base.LogProbs(toks, b.Hook(HookOptions{Stats: st, Recall: true, Dense: map[Unit]bool{{1, Attention}: true}}))
	require.NoError(t, err)
	require.Equal(t, b.Units(), st.Units())
	n := int64(len(toks))
	for _, u := range st.Units() {
		us, ok := st.Unit(u)
		require.True(t, ok)
		require.Equal(t, n, us.Tokens, "%s", u)
		require.Equal(t, fx.width(u), us.Width, "%s", u)
		require.InDelta(t, float64(us.Kept)/float64(n*int64(us.Width)), st.KeptFraction(u), 1e-15)
	}
	u0 := Unit{0, MLP}
	require.Equal(t, 16.0/64, st.KeptFraction(u0))
	r, ok := st.Recall(u0)
	require.True(t, ok)
	require.Equal(t, 1.0, r, "an oracle rule keeps its own oracle set")
	require.Equal(t, 3.0/4, st.KeptFraction(Unit{0, Attention}))
	require.Equal(t, 1.0, st.KeptFraction(Unit{1, Attention}), "forced dense keeps all")
	// The threshold's kept count is what the reference keeps.
	thr, _ := st.Unit(Unit{1, MLP})
	counter := &countingHook{refHook: refHook{rule: func(u Unit) Rule {
		if u == (Unit{1, Attention}) {
			return Rule{Mode: Dense} // as forced in the run above
		}
		return rules[u]
	}}}
	_, err = fx.base.LogProbs(toks, counter)
	require.NoError(t, err)
	require.Equal(t, counter.kept[Unit{1, MLP}], thr.Kept)
	require.Less(t, thr.Kept, n*64)
	r, ok = st.Recall(Unit{0, Attention})
	require.True(t, ok)
	require.Greater(t, r, 0.0)
	require.LessOrEqual(t, r, 1.0)
	// Without Recall, recall is not measured.
	st2 := &Stats{}
	_, err = fx.base.LogProbs(toks, b.Hook(HookOptions{Stats: st2}))
	require.NoError(t, err)
	_, ok = st2.Recall(u0)
	require.False(t, ok)
}

// countingHook runs the reference rules and counts what each unit keeps.
type countingHook struct {
	refHook
	kept map[Unit]int64
}

func (c *countingHook) count(u Unit, s []int32) []int32 {
	if c.kept == nil {
		c.kept = map[Unit]int64{}
	}
	c.kept[u] += int64(len(s))
	return s
}

func (c *countingHook) Heads(t *engine.Token) []int32 {
	u := Unit{t.Layer, Attention}
	return c.count(u, c.pick(u, t))
}

func (c *countingHook) Neurons(t *engine.Token) []int32 {
	u := Unit{t.Layer, MLP}
	return c.count(u, c.pick(u, t))
}

// A batch scores the predictor rows with one product (NeuronsBatch) and a
// decode scores them token by token (Neurons): the same selections, the same
// bits and the same statistics.
func TestBatchedPredictorEqualsTokenByToken(t *testing.T) {
	fx := newFixture(t, checkpoint.OPT, nil)
	rules := map[Unit]Rule{
		{0, MLP}: {Mode: PredictorMode, K: 20, Rank: 6, Input: InputSelf},
		{1, MLP}: {Mode: PredictorMode, K: 9, Rank: 5, Input: InputPrevious},
	}
	preds := map[Unit]*Predictor{{0, MLP}: randomPredictor(32, 6, 64, 7), {1, MLP}: randomPredictor(32, 5, 64, 8)}
	rule := func(u Unit) Rule {
		if r, ok := rules[u]; ok {
			return r
		}
		return Rule{Mode: Dense}
	}
	b := fx.open(fx.write(fx.manifest(rule), preds))
	toks := lpTokens(24, 3)
	var sb, sd Stats
	batch, err := fx.base.Forward([]*engine.Session{fx.base.NewSession()}, [][]int{toks}, b.Hook(HookOptions{Stats: &sb, Recall: true}))
	require.NoError(t, err)
	hd := b.Hook(HookOptions{Stats: &sd, Recall: true})
	s := fx.base.NewSession()
	var decode []float32
	for _, tok := range toks {
		h, err := fx.base.Forward([]*engine.Session{s}, [][]int{{tok}}, hd)
		require.NoError(t, err)
		decode = append(decode, h...)
	}
	require.Equal(t, batch, decode)
	for _, u := range []Unit{{0, MLP}, {1, MLP}} {
		a, _ := sb.Unit(u)
		d, _ := sd.Unit(u)
		require.Equal(t, d, a, "%s statistics", u)
		require.Equal(t, int64(len(toks)), a.Tokens)
		require.Equal(t, int64(len(toks))*int64(rules[u].K), a.Kept)
	}
}

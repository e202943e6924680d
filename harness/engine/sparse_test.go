package engine

import (
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/kernels"
	"sparsegate/harness/synth"
)

// posHook keeps a position-dependent subset: heads h with (h+pos)%3 != 0 (at
// least one), and neurons whose index is not ≡ pos mod 4 (75% of them).
type posHook struct{ heads int }

func (p posHook) Heads(t *Token) []int32 {
	var s []int32
	for h := 0; h < p.heads; h++ {
		if (h+t.Pos)%3 != 0 {
			s = append(s, int32(h))
		}
	}
	return s
}

func (p posHook) Neurons(t *Token) []int32 {
	var s []int32
	for i := range len(t.Dense()) {
		if i%4 != t.Pos%4 {
			s = append(s, int32(i))
		}
	}
	return s
}

// decodeLogProbs scores a sequence one token at a time through the cache, so
// every row takes the per-row gather path.
func decodeLogProbs(t *testing.T, m *Model, toks []int, hook Hook) []float64 {
	t.Helper()
	s := m.NewSession()
	var out []float64
	for i := 0; i+1 < len(toks); i++ {
		h, err := m.Forward([]*Session{s}, [][]int{{toks[i]}}, hook)
		require.NoError(t, err)
		lp := make([]float64, 1)
		require.NoError(t, m.targetLogProbs(h, []int{toks[i+1]}, lp, nil))
		out = append(out, lp[0])
	}
	return out
}

// A batch whose rows keep most neurons runs the MLP as dense products with
// the dropped neurons zeroed, and a batch's attention projects every head and
// zeroes the dropped ones; one token at a time both run gathers. Both must
// give the same bits, with masks that change from token to token.
func TestBatchedAndGatheredSparsePathsAgree(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			toks := seq(24, 96, 13)
			h := posHook{heads: m.Config.Heads}
			batch, err := m.LogProbs(toks, h)
			require.NoError(t, err)
			require.Equal(t, batch, decodeLogProbs(t, m, toks, h))
			dense, err := m.LogProbs(toks, nil)
			require.NoError(t, err)
			require.NotEqual(t, dense, batch)
		})
	}
}

// groupHook keeps only the heads of the first key/value group, so the other
// groups' keys and values are never computed.
type groupHook struct{ keep int }

func (g groupHook) Heads(*Token) []int32   { return iota32(g.keep) }
func (g groupHook) Neurons(*Token) []int32 { return nil }

func TestSkippedKeyValueHeadsEqualZeroedWeights(t *testing.T) {
	m := tinyModel(t, checkpoint.Llama, 2, nil) // 4 heads, 2 key/value heads
	toks := seq(20, 96, 14)
	got, err := m.LogProbs(toks, groupHook{keep: 2})
	require.NoError(t, err)
	c := m.Config
	hd, d := c.HeadDim, c.Hidden
	zeroed := tinyModel(t, checkpoint.Llama, 2, func(name string, v []float32) {
		switch {
		case strings.HasSuffix(name, "q_proj.weight"):
			clear(v[2*hd*d:]) // heads 2 and 3
		case strings.HasSuffix(name, "o_proj.weight"):
			for r := 0; r < d; r++ {
				clear(v[r*c.Heads*hd+2*hd : (r+1)*c.Heads*hd])
			}
		}
	})
	want, err := zeroed.LogProbs(toks, nil)
	require.NoError(t, err)
	for i := range want {
		require.InDelta(t, want[i], got[i], 1e-5*max(1, -want[i]), "position %d", i)
	}
	require.Equal(t, got, decodeLogProbs(t, m, toks, groupHook{keep: 2}))
}

// The neuron-major copies (each neuron's gate, up and down weights side by
// side; o input-major when there are no panels) change memory layout only:
// hooked decode gives the same bits on every family, in f32 and f16, on 1
// and 3 threads, with and without panels.
func TestNeuronMajorGivesTheSameBits(t *testing.T) {
	for _, f := range families {
		for _, dt := range []checkpoint.DType{checkpoint.F32, checkpoint.F16} {
			t.Run(fmt.Sprintf("%s_%s", f, dt), func(t *testing.T) {
				dir := filepath.Join(t.TempDir(), string(f))
				require.NoError(t, synth.Write(dir, synth.Tiny(f), synth.Options{Seed: 7, DType: dt}))
				m, err := Load(dir, Options{Threads: 1})
				require.NoError(t, err)
				defer m.Close()
				toks := seq(20, 96, 15)
				h := posHook{heads: m.Config.Heads}
				want := decodeLogProbs(t, m, toks, h)
				for _, threads := range []int{1, 3} {
					for _, noPanels := range []bool{false, true} {
						nm, err := Load(dir, Options{Threads: threads, NeuronMajor: true, NoPanels: noPanels})
						require.NoError(t, err)
						for li := range nm.layers {
							require.NotNil(t, nm.layers[li].neurons, "layer %d has no neuron-major copy", li)
							// Finite weights: its sparse rows drop zero activations.
							require.True(t, nm.layers[li].downFinite, "layer %d", li)
							// Without panels, dropped heads scatter from an
							// input-major copy of o (OPT and Llama store o
							// output-major); with them, from o's panels.
							wantOT := noPanels && !nm.layers[li].o.Transposed
							require.Equal(t, wantOT, nm.layers[li].oT != nil, "layer %d: input-major copy of o", li)
						}
						require.Equal(t, want, decodeLogProbs(t, nm, toks, h), "%d threads, NoPanels %v", threads, noPanels)
						nm.Close()
					}
				}
			})
		}
	}
}

// The panel copies change memory layout only: decode (single-token steps
// read the panels), prefill (the GEMM packs from them) and hooked decode
// with heads dropped (gathers of whole head panels) give the bits of a model
// loaded without them, on every family and for 1 and 3 threads.
func TestPanelsGiveTheSameBits(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			plain := tinyModel(t, f, 1, nil)
			np, err := Load(plain.Dir, Options{Threads: 1, NoPanels: true})
			require.NoError(t, err)
			defer np.Close()
			require.Nil(t, np.head.Panels, "NoPanels left a panel copy on the head")
			toks := seq(20, 96, 16)
			h := posHook{heads: np.Config.Heads}
			want := decodeLogProbs(t, np, toks, nil)
			wantHooked := decodeLogProbs(t, np, toks, h)
			wantPrefill, err := np.Forward([]*Session{np.NewSession()}, [][]int{toks}, nil)
			require.NoError(t, err)
			for _, threads := range []int{1, 3} {
				m, err := Load(plain.Dir, Options{Threads: threads})
				require.NoError(t, err)
				require.NotNil(t, m.head.Panels, "Load made no panel copy of the head")
				require.Equal(t, want, decodeLogProbs(t, m, toks, nil))
				require.Equal(t, wantHooked, decodeLogProbs(t, m, toks, h))
				got, err := m.Forward([]*Session{m.NewSession()}, [][]int{toks}, nil)
				require.NoError(t, err)
				require.Equal(t, wantPrefill, got)
				m.Close()
			}
		})
	}
}

// A small half-precision model is widened to f32 at load (exactly), and runs
// to the same bits as with its stored width, dense, hooked and batched.
func TestWideningGivesTheSameBits(t *testing.T) {
	for _, f := range families {
		for _, dt := range []checkpoint.DType{checkpoint.F16, checkpoint.BF16} {
			t.Run(string(f)+"/"+string(dt), func(t *testing.T) {
				dir := filepath.Join(t.TempDir(), string(f))
				require.NoError(t, synth.Write(dir, synth.Tiny(f), synth.Options{Seed: 7, DType: dt}))
				narrow, err := Load(dir, Options{Threads: 1, NoWiden: true})
				require.NoError(t, err)
				defer narrow.Close()
				wide, err := Load(dir, Options{Threads: 2})
				require.NoError(t, err)
				defer wide.Close()
				require.Equal(t, kernels.F32, wide.head.DType, "the small model was not widened")
				require.Equal(t, kernels.F32, wide.layers[0].up.DType)
				require.NotEqual(t, kernels.F32, narrow.head.DType, "NoWiden widened")
				toks := seq(20, 96, 16)
				h := posHook{heads: narrow.Config.Heads}
				require.Equal(t, decodeLogProbs(t, narrow, toks, nil), decodeLogProbs(t, wide, toks, nil))
				require.Equal(t, decodeLogProbs(t, narrow, toks, h), decodeLogProbs(t, wide, toks, h))
				a, err := narrow.Forward([]*Session{narrow.NewSession()}, [][]int{toks}, nil)
				require.NoError(t, err)
				b, err := wide.Forward([]*Session{wide.NewSession()}, [][]int{toks}, nil)
				require.NoError(t, err)
				require.Equal(t, a, b)
			})
		}
	}
}

// A single-row Forward hands its state back for the next one: a decode
// after other sequences (hooked and dense, another model view sharing the
// pool) gives the bits of the same decode on a freshly loaded model, and
// the pool really is in use.
func TestReusedDecodeStateLeavesNoTrace(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			fresh, err := Load(m.Dir, Options{Threads: 2})
			require.NoError(t, err)
			defer fresh.Close()
			toks := seq(18, 96, 21)
			h := posHook{heads: m.Config.Heads}
			want := decodeLogProbs(t, fresh, toks, h)
			decodeLogProbs(t, m, seq(30, 96, 5), h)
			decodeLogProbs(t, m.WithThreads(1), seq(12, 96, 6), nil)
			st, ok := m.states.Get().(*state)
			require.True(t, ok, "no single-row state was handed back")
			m.states.Put(st)
			require.Equal(t, want, decodeLogProbs(t, m, toks, h))
		})
	}
}

// A sparse row drops its exactly-zero activations before the down product
// only when every down weight is finite: with an infinity in a neuron's
// down column, 0·Inf must still poison the outputs as the dense product
// does. Layer 0's neuron 5 is always off (zero up row, bias −1), kept by
// the hook at three positions in four, and meets an infinity in its down
// column; the model's hooked decode gives the hidden rows (NaN where NaN)
// of a model loaded without the neuron-major copies, which never drops
// zeros. Dropping them regardless gives finite rows there, and fails.
func TestZeroActivationsAreKeptWhenWeightsAreNotFinite(t *testing.T) {
	const j = 5
	ffn := synth.Tiny(checkpoint.OPT).FFN
	plain := tinyModel(t, checkpoint.OPT, 1, func(name string, v []float32) {
		switch {
		case strings.HasSuffix(name, "layers.0.fc1.weight"):
			in := len(v) / ffn
			clear(v[j*in : (j+1)*in])
		case strings.HasSuffix(name, "layers.0.fc1.bias"):
			v[j] = -1
		case strings.HasSuffix(name, "layers.0.fc2.weight"):
			v[3*ffn+j] = float32(math.Inf(1)) // output 3's weight from neuron j
		}
	})
	nm, err := Load(plain.Dir, Options{Threads: 1, NeuronMajor: true})
	require.NoError(t, err)
	defer nm.Close()
	require.False(t, nm.layers[0].downFinite)
	require.True(t, nm.layers[1].downFinite)
	toks := seq(12, 96, 17)
	h := posHook{heads: nm.Config.Heads}
	// The final hidden rows, one token at a time (log-probabilities refuse
	// NaN logits).
	decode := func(m *Model) []float32 {
		s := m.NewSession()
		defer s.Close()
		var out []float32
		for _, tok := range toks {
			hid, err := m.Forward([]*Session{s}, [][]int{{tok}}, h)
			require.NoError(t, err)
			out = append(out, hid...)
		}
		return out
	}
	want, got := decode(plain), decode(nm)
	nans := 0
	for i := range want {
		if math.IsNaN(float64(want[i])) {
			nans++
			require.True(t, math.IsNaN(float64(got[i])), "value %d: %v, want NaN", i, got[i])
			continue
		}
		require.Equal(t, math.Float32bits(want[i]), math.Float32bits(got[i]), "value %d", i)
	}
	require.Positive(t, nans, "no position met 0·Inf: the test plants nothing")
}

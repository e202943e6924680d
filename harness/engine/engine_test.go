package engine

import (
	"bytes"
	"fmt"
	"math"
	"path/filepath"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/checkpoint"
	"sparsegate/harness/synth"
)

var families = []checkpoint.Family{checkpoint.OPT, checkpoint.GPT2, checkpoint.Llama}

// tinyModel writes and loads a small random checkpoint of the family.
func tinyModel(t testing.TB, f checkpoint.Family, threads int, edit func(string, []float32)) *Model {
	t.Helper()
	dir := filepath.Join(t.TempDir(), string(f))
	require.NoError(t, synth.Write(dir, synth.Tiny(f), synth.Options{Seed: 7, Edit: edit}))
	m, err := Load(dir, Options{Threads: threads})
	require.NoError(t, err)
	t.Cleanup(func() { m.Close() })
	return m
}

func seq(n, vocab int, seed int) []int {
	s := make([]int, n)
	for i := range s {
		s[i] = (i*31 + seed*17 + 5) % vocab
	}
	return s
}

func TestThreadCountDoesNotChangeResults(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			toks := seq(40, 96, 1)
			var ref []float64
			for _, th := range []int{1, 2, 3, 8} {
				m := tinyModel(t, f, th, nil)
				lp, err := m.LogProbs(toks, nil)
				require.NoError(t, err)
				if ref == nil {
					ref = lp
					continue
				}
				require.Equal(t, ref, lp, "threads=%d", th)
			}
		})
	}
}

func TestBatchEqualsAlone(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			seqs := [][]int{seq(13, 96, 1), seq(29, 96, 2), seq(2, 96, 3)}
			batch, err := m.BatchLogProbs(seqs, nil)
			require.NoError(t, err)
			for i, s := range seqs {
				alone, err := m.LogProbs(s, nil)
				require.NoError(t, err)
				require.Equal(t, alone, batch[i], "sequence %d", i)
			}
		})
	}
}

// keepAll is a hook that keeps every unit, either by returning nil or by
// listing every index.
type keepAll struct {
	heads, neurons int
	list           bool
	calls          int
}

func (k *keepAll) Heads(t *Token) []int32 {
	k.calls++
	if !k.list {
		return nil
	}
	return iota32(k.heads)
}

func (k *keepAll) Neurons(t *Token) []int32 {
	k.calls++
	if !k.list {
		return nil
	}
	return iota32(k.neurons)
}

func iota32(n int) []int32 {
	s := make([]int32, n)
	for i := range s {
		s[i] = int32(i)
	}
	return s
}

func TestHookKeepingEverythingIsTheDensePath(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			toks := seq(21, 96, 4)
			dense, err := m.LogProbs(toks, nil)
			require.NoError(t, err)
			for _, list := range []bool{false, true} {
				h := &keepAll{heads: m.Config.Heads, neurons: m.Config.FFN, list: list}
				got, err := m.LogProbs(toks, h)
				require.NoError(t, err)
				require.Equal(t, dense, got, "list=%v", list)
				require.Equal(t, 2*m.Config.Layers*len(toks), h.calls)
			}
		})
	}
}

// dropHalf keeps the even heads and the first half of the neurons, and
// records what the oracle view (Dense) returned.
type dropHalf struct {
	heads, neurons int
	sawDense       bool
}

func (h *dropHalf) Heads(t *Token) []int32 {
	if n := t.Dense(); len(n) == h.heads {
		h.sawDense = true
	}
	var s []int32
	for i := 0; i < h.heads; i += 2 {
		s = append(s, int32(i))
	}
	return s
}

func (h *dropHalf) Neurons(t *Token) []int32 {
	if len(t.Dense()) != h.neurons {
		panic("Dense has the wrong length")
	}
	return iota32(h.neurons / 2)
}

func TestHookThatDropsUnitsChangesScores(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			toks := seq(17, 96, 5)
			dense, err := m.LogProbs(toks, nil)
			require.NoError(t, err)
			h := &dropHalf{heads: m.Config.Heads, neurons: m.Config.FFN}
			sparse, err := m.LogProbs(toks, h)
			require.NoError(t, err)
			require.True(t, h.sawDense)
			require.NotEqual(t, dense, sparse)
			// Zeroing the dropped units' weights must give the same function,
			// up to rounding (the sparse path skips them instead).
			zeroed := tinyModel(t, f, 2, zeroDropped(m.Config))
			want, err := zeroed.LogProbs(toks, nil)
			require.NoError(t, err)
			for i := range want {
				require.InDelta(t, want[i], sparse[i], 1e-4, "position %d", i)
			}
		})
	}
}

// zeroDropped zeroes the weights dropHalf skips: the odd heads' query rows
// and output columns, and the second half of the MLP neurons.
func zeroDropped(c *checkpoint.Config) func(string, []float32) {
	d, hd, f := c.Hidden, c.HeadDim, c.FFN
	oddHead := func(i int) bool { return (i/hd)%2 == 1 }
	return func(name string, v []float32) {
		switch {
		case strings.HasSuffix(name, "q_proj.weight"): // [H·hd, d]
			for r := 0; r < c.Heads*hd; r++ {
				if oddHead(r) {
					clear(v[r*d : (r+1)*d])
				}
			}
		case strings.HasSuffix(name, "q_proj.bias"):
			for r := range v {
				if oddHead(r) {
					v[r] = 0
				}
			}
		case strings.HasSuffix(name, "c_attn.weight"): // [d, 3d], q in columns [0,d)
			for k := 0; k < d; k++ {
				for j := 0; j < d; j++ {
					if oddHead(j) {
						v[k*3*d+j] = 0
					}
				}
			}
		case strings.HasSuffix(name, "c_attn.bias"):
			for j := 0; j < d; j++ {
				if oddHead(j) {
					v[j] = 0
				}
			}
		case strings.HasSuffix(name, "out_proj.weight") || strings.HasSuffix(name, "o_proj.weight"): // [d, H·hd]
			in := c.Heads * hd
			for r := 0; r < d; r++ {
				for j := 0; j < in; j++ {
					if oddHead(j) {
						v[r*in+j] = 0
					}
				}
			}
		case strings.HasSuffix(name, "attn.c_proj.weight"): // [d(in), d(out)]
			for k := 0; k < d; k++ {
				if oddHead(k) {
					clear(v[k*d : (k+1)*d])
				}
			}
		case strings.HasSuffix(name, "fc1.weight") || strings.HasSuffix(name, "up_proj.weight") || strings.HasSuffix(name, "gate_proj.weight"): // [f, d]
			clear(v[f/2*d:])
		case strings.HasSuffix(name, "fc1.bias"):
			clear(v[f/2:])
		case strings.HasSuffix(name, "c_fc.weight"): // [d, f]
			for k := 0; k < d; k++ {
				clear(v[k*f+f/2 : (k+1)*f])
			}
		case strings.HasSuffix(name, "c_fc.bias"):
			clear(v[f/2:])
		}
	}
}

func TestContinuationsMatchFullSequence(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			ctx := seq(9, 96, 6)
			conts := [][]int{{3}, {4, 5, 6}, seq(5, 96, 7)}
			got, err := m.Continuations(ctx, conts, nil)
			require.NoError(t, err)
			for i, c := range conts {
				full, err := m.LogProbs(append(append([]int{}, ctx...), c...), nil)
				require.NoError(t, err)
				want := full[len(ctx)-1:]
				require.Equal(t, want, got[i].TokenLogProbs, "continuation %d", i)
				sum := 0.0
				for _, v := range want {
					sum += v
				}
				require.Equal(t, sum, got[i].LogProb)
			}
		})
	}
}

func TestGenerateUsesCacheCorrectly(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			m := tinyModel(t, f, 2, nil)
			prompt := seq(6, 96, 8)
			g, err := m.Generate(prompt, GenerateOptions{MaxTokens: 12})
			require.NoError(t, err)
			require.Len(t, g.Tokens, 12)
			require.Equal(t, StopMaxTokens, g.Reason)
			// Each generated token must be the argmax of a full recomputation.
			all := append([]int{}, prompt...)
			for _, next := range g.Tokens {
				lp, err := m.Continuations(all, [][]int{{next}}, nil)
				require.NoError(t, err)
				require.True(t, lp[0].Greedy, "token %d is not the argmax after %v", next, all)
				all = append(all, next)
			}
			// A stop id ends generation and is kept.
			stop := g.Tokens[3]
			g2, err := m.Generate(prompt, GenerateOptions{MaxTokens: 12, StopIDs: []int{stop}})
			require.NoError(t, err)
			require.Equal(t, StopID, g2.Reason)
			require.Equal(t, stop, g2.Tokens[len(g2.Tokens)-1])
		})
	}
}

func TestGenerateStopSequence(t *testing.T) {
	m := tinyModel(t, checkpoint.OPT, 1, nil)
	tb := func(id int) []byte { return []byte(fmt.Sprintf("<%d>", id)) }
	g, err := m.Generate(seq(4, 96, 9), GenerateOptions{MaxTokens: 10, TokenBytes: tb})
	require.NoError(t, err)
	require.Len(t, g.Tokens, 10)
	// Stop on the text of the third token, with the closing bracket of the second.
	stop := append([]byte(">"), tb(g.Tokens[2])...)
	cut := bytes.Index(g.Text, stop)
	g2, err := m.Generate(seq(4, 96, 9), GenerateOptions{MaxTokens: 10, TokenBytes: tb, Stop: [][]byte{stop}})
	require.NoError(t, err)
	require.Equal(t, StopSequence, g2.Reason)
	require.Equal(t, string(g.Text[:cut]), string(g2.Text))
	require.Less(t, len(g2.Tokens), 10)
}

func TestSlidingWindowScoresEveryTokenOnce(t *testing.T) {
	m := tinyModel(t, checkpoint.GPT2, 2, nil)
	toks := seq(50, 96, 10)
	full, err := m.LogProbs(toks, nil)
	require.NoError(t, err)
	// A window longer than the text is one pass: identical to LogProbs.
	lp, wins, err := m.SlidingLogProbs(toks, SlidingOptions{Window: 64, Stride: 32})
	require.NoError(t, err)
	require.Equal(t, full, lp)
	require.Len(t, wins, 1)
	// Short windows: every target scored exactly once, windows tile the text.
	lp, wins, err = m.SlidingLogProbs(toks, SlidingOptions{Window: 16, Stride: 8})
	require.NoError(t, err)
	require.Len(t, lp, len(toks)-1)
	next := 1
	for _, w := range wins {
		require.Equal(t, next, w.First)
		require.LessOrEqual(t, w.End-w.Start, 16)
		next = w.End
	}
	require.Equal(t, len(toks), next)
	// Targets scored in the first window equal the full pass (same context).
	for i := 0; i < 15; i++ {
		require.Equal(t, full[i], lp[i])
	}
	// Later ones differ (less context).
	require.NotEqual(t, full[40], lp[40])
	_, _, err = m.SlidingLogProbs(toks, SlidingOptions{Window: 16, Stride: 16})
	require.ErrorContains(t, err, "stride 16")
}

// The perplexity of a model whose logits are all equal is the vocabulary
// size (a textbook identity; common practice, no source).
func TestUniformLogitsPerplexityIsVocabularySize(t *testing.T) {
	for _, f := range families {
		t.Run(string(f), func(t *testing.T) {
			zeroHead := func(name string, v []float32) {
				if strings.HasSuffix(name, "embed_tokens.weight") || name == "wte.weight" || name == "lm_head.weight" {
					clear(v)
				}
			}
			m := tinyModel(t, f, 2, zeroHead)
			lp, err := m.LogProbs(seq(30, 96, 11), nil)
			require.NoError(t, err)
			nll := 0.0
			for _, v := range lp {
				nll -= v
			}
			ppl := math.Exp(nll / float64(len(lp)))
			require.InEpsilon(t, 96.0, ppl, 1e-12)
		})
	}
}

func TestNaNWeightsFailLoudly(t *testing.T) {
	nan := func(name string, v []float32) {
		if strings.HasSuffix(name, "layers.0.fc1.weight") {
			v[3] = float32(math.NaN())
		}
	}
	m := tinyModel(t, checkpoint.OPT, 1, nan)
	_, err := m.LogProbs(seq(10, 96, 12), nil)
	require.ErrorIs(t, err, ErrNonFinite)
	_, err = m.Generate(seq(3, 96, 12), GenerateOptions{MaxTokens: 2})
	require.ErrorIs(t, err, ErrNonFinite)
}

func TestInputChecks(t *testing.T) {
	m := tinyModel(t, checkpoint.Llama, 1, nil)
	_, err := m.LogProbs([]int{1, 2, 96}, nil)
	require.ErrorContains(t, err, "token id 96 is outside the vocabulary")
	_, err = m.LogProbs(seq(65, 96, 1), nil)
	require.ErrorContains(t, err, "exceed the model's 64 positions")
}

// Package textscore measures how well a model predicts a text: token count,
// mean negative log-likelihood, perplexity and bits per byte, scored with a
// sliding window so texts longer than the model's context are handled.
//
// # Formulas
//
// With the text encoded as the model sees it (special tokens included, as its
// tokenizer configuration says) into tokens t₀ … t_n, every token but the first
// is a target, scored once with up to Window−1 tokens of context:
//
//	NLL         = −Σᵢ ln P(tᵢ | context)          (nats, over the scored targets)
//	mean NLL    = NLL / targets
//	perplexity  = exp(mean NLL)
//	bits/byte   = NLL / (ln 2 · bytes)
//
// where bytes counts the text bytes of the scored content tokens (a leading
// content token that nothing predicts is left out of both sums), so bits per
// byte compares models with different tokenizers.
package textscore

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"sparsegate/harness/engine"
)

// Options configure scoring; zero fields take defaults.
type Options struct {
	// Window is the most tokens per forward pass; 0 means the model's maximum
	// positions, capped at 1024.
	Window int
	// Stride is the step between windows; 0 means half the window.
	Stride int
	// Hook restricts units per token; nil runs dense.
	Hook engine.Hook
	// Progress is called after each window (scored, total targets).
	Progress func(scored, total int)
}

// A Result summarises the score of one text.
type Result struct {
	// Tokens is the length of the encoded text, special tokens included.
	Tokens int
	// Targets is the number of scored tokens.
	Targets int
	// Bytes is the number of text bytes the scored content tokens cover.
	Bytes int
	// NLL is the total negative log-likelihood in nats.
	NLL float64
	// MeanNLL is NLL per target.
	MeanNLL float64
	// Perplexity is exp(MeanNLL).
	Perplexity float64
	// BitsPerByte is NLL / (ln 2 · Bytes).
	BitsPerByte float64
	// Window and Stride are the values used.
	Window, Stride int
	// Windows is the number of forward passes.
	Windows int
	// TokenLogProbs holds each target's log-probability, in order.
	TokenLogProbs []float64
}

// Score encodes text with the model's tokenizer and scores it.
func Score(m *engine.Model, text []byte, opts Options) (*Result, error) {
	if m.Tokenizer == nil {
		return nil, fmt.Errorf("%s: the checkpoint has no tokenizer (tokenizer.json or vocab.json + merges.txt); text cannot be scored", m.Dir)
	}
	if len(text) == 0 {
		return nil, errors.New("the text is empty; nothing to score")
	}
	tok := m.Tokenizer
	content := tok.Encode(string(text))
	full := tok.EncodeForModel(string(text))
	p := findRun(full, content)
	if p < 0 {
		return nil, fmt.Errorf("internal: the tokenizer's model encoding does not contain its plain encoding")
	}
	if len(full) < 2 {
		return nil, fmt.Errorf("the text encodes to %d token; at least 2 are needed to score anything", len(full))
	}
	if opts.Window == 0 {
		opts.Window = min(m.Config.MaxPositions, 1024)
	}
	if opts.Stride == 0 {
		opts.Stride = max(1, opts.Window/2)
	}
	lp, wins, err := m.SlidingLogProbs(full, engine.SlidingOptions{Window: opts.Window, Stride: opts.Stride, Hook: opts.Hook, Progress: opts.Progress})
	if err != nil {
		return nil, err
	}
	r := &Result{Tokens: len(full), Targets: len(lp), Window: opts.Window, Stride: opts.Stride, Windows: len(wins), TokenLogProbs: lp}
	for _, v := range lp {
		r.NLL -= v
	}
	r.Bytes = len(text)
	if p == 0 { // no special token before the text: its first token is not scored
		r.Bytes -= len(tok.TokenBytes(content[0]))
	}
	r.MeanNLL = r.NLL / float64(r.Targets)
	r.Perplexity = math.Exp(r.MeanNLL)
	if r.Bytes > 0 {
		r.BitsPerByte = r.NLL / (math.Ln2 * float64(r.Bytes))
	}
	return r, nil
}

// findRun returns the first index where needle occurs in hay, or -1.
func findRun(hay, needle []int) int {
	for i := 0; i+len(needle) <= len(hay); i++ {
		if slices.Equal(hay[i:i+len(needle)], needle) {
			return i
		}
	}
	return -1
}

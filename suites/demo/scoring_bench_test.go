package demo_test

import (
	"bytes"
	"encoding/json"
	"fmt"
	"hash/fnv"
	"io/fs"
	"math/rand/v2"
	"os"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

// The demo suite's scoring work, for .ci/bench: the held-out perplexity probe
// (heldout-ppl: data/heldout.txt cut to its max_bytes, sliding windows) and
// every choice probe (status-mc and sum-mc 4-shot, lookup-mc 2-shot), on the
// demo model with 2 threads. BenchmarkDemoScoring times it through the
// runner; torchbench's sibling scorebench.py does the same forward passes in
// PyTorch on the token ids this file writes, so tokenisation is on neither
// side of the engine-only comparison.

// scoringThreads is the thread count of both sides.
const scoringThreads = 2

// scoringWork is the work as token ids, the file scorebench.py reads.
type scoringWork struct {
	Threads int           `json:"threads"`
	Windows []scoreWindow `json:"windows"`
	Choices []scoreChoice `json:"choices"`
	// Go holds this side's answers, which the script checks its own against.
	Go struct {
		WindowNLL []float64 `json:"window_nll"`
		Chosen    []int     `json:"chosen"`
	} `json:"go"`
}

// scoreWindow is one forward pass of the perplexity probe: IDs are its
// tokens, and IDs[First:] are the targets it scores (each predicted from the
// tokens before it).
type scoreWindow struct {
	IDs   []int `json:"ids"`
	First int   `json:"first"`
}

// scoreChoice is one choice item: its few-shot prompt as the model sees it,
// each option's tokens and text bytes, and whether the probe scores options
// per byte.
type scoreChoice struct {
	Probe       string  `json:"probe"`
	ID          string  `json:"id"`
	Context     []int   `json:"context"`
	Options     [][]int `json:"options"`
	OptionBytes []int   `json:"option_bytes"`
	PerByte     bool    `json:"per_byte"`
}

// scoringProbes names the probes of the work: heldout-ppl and every choice
// probe, in suite order.
func scoringProbes(s *suites.Suite) []string {
	var out []string
	for _, p := range s.Probes {
		if p.Name == "heldout-ppl" || p.Kind == suites.Choice {
			out = append(out, p.Name)
		}
	}
	return out
}

// buildWork lays out the probes' work as the runner does it (its prepare,
// windows, shots, prompt and choose, restated here because they are the
// runner's own; TestScoringWorkMatchesRunner holds the two together).
func buildWork(s *suites.Suite, m *engine.Model, names []string) (*scoringWork, error) {
	w := &scoringWork{Threads: scoringThreads}
	tok := m.Tokenizer
	for _, name := range names {
		p := s.Probe(name)
		switch p.Kind {
		case suites.Perplexity:
			text, err := fs.ReadFile(s.FS, p.Text)
			if err != nil {
				return nil, fmt.Errorf("probe %s: %w", name, err)
			}
			if p.MaxBytes > 0 && len(text) > p.MaxBytes {
				text = text[:p.MaxBytes]
				if i := bytes.LastIndexByte(text, '\n'); i > 0 {
					text = text[:i+1]
				}
			}
			ids := tok.EncodeForModel(string(text))
			win, stride := p.Window, p.Stride
			if win == 0 {
				win = min(m.Config.MaxPositions, 1024)
			}
			if stride == 0 {
				stride = max(1, win/2)
			}
			scored := 1
			for start := 0; scored < len(ids); start += stride {
				end := min(start+win, len(ids))
				if end <= scored {
					continue
				}
				first := max(scored, start+1)
				w.Windows = append(w.Windows, scoreWindow{IDs: ids[start:end], First: first - start})
				scored = end
			}
		case suites.Choice:
			items, err := suites.ReadItems(s.FS, p.Items, p.Kind)
			if err != nil {
				return nil, fmt.Errorf("probe %s: %w", name, err)
			}
			if p.Limit > 0 && p.Limit < len(items) {
				items = items[:p.Limit]
			}
			var pool []suites.Item
			if p.Pool != "" {
				if pool, err = suites.ReadItems(s.FS, p.Pool, p.Kind); err != nil {
					return nil, fmt.Errorf("probe %s: %w", name, err)
				}
			}
			for i := range items {
				it := &items[i]
				c := scoreChoice{Probe: name, ID: it.ID, Context: tok.EncodeForModel(fewShotPrompt(p, pool, it)), PerByte: p.Score == "per-byte"}
				for _, o := range it.Options {
					c.Options = append(c.Options, tok.Encode(o))
					c.OptionBytes = append(c.OptionBytes, len(o))
				}
				w.Choices = append(w.Choices, c)
			}
		default:
			return nil, fmt.Errorf("probe %s: kind %s is not scoring work", name, p.Kind)
		}
	}
	return w, nil
}

// fewShotPrompt is the runner's prompt: Shots pool examples (never the item
// itself), drawn by a PCG seeded with the probe's seed and the FNV-1a hash of
// the item id (a partial Fisher–Yates shuffle), each solved and followed by
// the separator, then the item's context.
func fewShotPrompt(p *suites.Probe, pool []suites.Item, it *suites.Item) string {
	var b strings.Builder
	if p.Shots > 0 {
		h := fnv.New64a()
		h.Write([]byte(it.ID))
		r := rand.New(rand.NewPCG(p.Seed, h.Sum64()))
		var idx []int
		for i := range pool {
			if pool[i].ID != it.ID && pool[i].Context != it.Context {
				idx = append(idx, i)
			}
		}
		for i := range p.Shots {
			j := i + r.IntN(len(idx)-i)
			idx[i], idx[j] = idx[j], idx[i]
			b.WriteString(pool[idx[i]].Solved())
			b.WriteString(p.Separator)
		}
	}
	b.WriteString(it.Context)
	return b.String()
}

// windowNLL scores one window as the runner does: one forward pass, the
// negative log-likelihood of its targets summed in order.
func windowNLL(m *engine.Model, w scoreWindow) (float64, error) {
	lp, err := m.LogProbs(w.IDs, nil)
	if err != nil {
		return 0, err
	}
	nll := 0.0
	for t := w.First; t < len(w.IDs); t++ {
		nll -= lp[t-1]
	}
	return nll, nil
}

// choose scores a choice item as the runner does: the context once, every
// option as one batch on copies of its cache; the best gate score wins, ties
// to the lowest index. It returns the chosen option and the margin over the
// second best.
func choose(m *engine.Model, c scoreChoice) (int, float64, error) {
	scores, err := m.Continuations(c.Context, c.Options, nil)
	if err != nil {
		return 0, 0, err
	}
	gate := make([]float64, len(scores))
	for i, s := range scores {
		gate[i] = s.LogProb
		if c.PerByte {
			gate[i] = s.LogProb / float64(c.OptionBytes[i])
		}
	}
	best, second := 0, -1
	for i := 1; i < len(gate); i++ {
		switch {
		case gate[i] > gate[best]:
			best, second = i, best
		case second < 0 || gate[i] > gate[second]:
			second = i
		}
	}
	return best, gate[best] - gate[second], nil
}

// engineWork runs the work on the pre-tokenised ids and fills w.Go.
func engineWork(m *engine.Model, w *scoringWork) error {
	w.Go.WindowNLL, w.Go.Chosen = w.Go.WindowNLL[:0], w.Go.Chosen[:0]
	for i, win := range w.Windows {
		nll, err := windowNLL(m, win)
		if err != nil {
			return fmt.Errorf("window %d: %w", i, err)
		}
		w.Go.WindowNLL = append(w.Go.WindowNLL, nll)
	}
	for _, c := range w.Choices {
		best, _, err := choose(m, c)
		if err != nil {
			return fmt.Errorf("%s item %s: %w", c.Probe, c.ID, err)
		}
		w.Go.Chosen = append(w.Go.Chosen, best)
	}
	return nil
}

func openDemo(tb testing.TB) (*suites.Suite, *runner.Target) {
	tb.Helper()
	s, err := suites.LoadBuiltin("demo")
	require.NoError(tb, err)
	t, err := runner.Open("model", engine.Options{Threads: scoringThreads})
	require.NoError(tb, err)
	tb.Cleanup(func() { t.Close() })
	return s, t
}

func runScoring(tb testing.TB, s *suites.Suite, t *runner.Target, names []string) *results.Results {
	tb.Helper()
	r, err := runner.Run(s, t, nil, runner.Options{Probes: names})
	require.NoError(tb, err)
	ran := 0
	for _, p := range r.Probes {
		if p.Status == results.Ran {
			ran++
		}
	}
	require.Equal(tb, len(names), ran, "every selected probe runs")
	return r
}

// The token ids handed to the PyTorch side describe exactly the runner's
// work: scoring them through the engine calls the runner makes gives the
// runner's per-window negative log-likelihoods and per-item choices and
// margins bit for bit, item for item.
func TestScoringWorkMatchesRunner(t *testing.T) {
	s, tg := openDemo(t)
	names := scoringProbes(s)
	require.Equal(t, []string{"heldout-ppl", "status-mc", "sum-mc", "lookup-mc"}, names)
	w, err := buildWork(s, tg.Model, names)
	require.NoError(t, err)
	r := runScoring(t, s, tg, names)
	ci := 0
	for _, p := range r.Probes {
		if p.Status != results.Ran {
			continue
		}
		switch p.Kind {
		case suites.Perplexity:
			require.Len(t, w.Windows, len(p.Items), p.Name)
			for i, it := range p.Items {
				nll, err := windowNLL(tg.Model, w.Windows[i])
				require.NoError(t, err)
				require.Equal(t, *it.NLL, nll, "%s window %d", p.Name, i)
				require.Equal(t, *it.Tokens, len(w.Windows[i].IDs)-w.Windows[i].First, "%s window %d targets", p.Name, i)
			}
		case suites.Choice:
			for _, it := range p.Items {
				c := w.Choices[ci]
				ci++
				require.Equal(t, p.Name+"/"+it.ID, c.Probe+"/"+c.ID)
				best, margin, err := choose(tg.Model, c)
				require.NoError(t, err)
				require.Equal(t, *it.Chosen, best, "%s item %s", p.Name, it.ID)
				require.Equal(t, *it.Margin, margin, "%s item %s", p.Name, it.ID)
			}
		}
	}
	require.Equal(t, len(w.Choices), ci, "every choice item was compared")
	require.NotEmpty(t, w.Windows)
	require.Len(t, w.Choices, 140) // limits 60 + 40 + 40 in suite.yaml
}

// BenchmarkDemoScoring times the demo suite's scoring work on 2 threads, two
// ways: runner is runner.Run on the selected probes (reading and tokenising
// the data included, as a gate runs it); engine is the same engine calls on
// the pre-tokenised ids, exactly the work scorebench.py does in PyTorch. With
// SPARSEGATE_BENCH_SCORING_IDS=FILE it first writes the ids, with this side's
// answers, to FILE for the script.
func BenchmarkDemoScoring(b *testing.B) {
	s, tg := openDemo(b)
	names := scoringProbes(s)
	w, err := buildWork(s, tg.Model, names)
	if err != nil {
		b.Fatal(err)
	}
	if err := engineWork(tg.Model, w); err != nil { // also the warm-up
		b.Fatal(err)
	}
	if out := os.Getenv("SPARSEGATE_BENCH_SCORING_IDS"); out != "" {
		data, err := json.Marshal(w)
		if err != nil {
			b.Fatal(err)
		}
		if err := os.WriteFile(out, data, 0o644); err != nil {
			b.Fatalf("writing the token ids: %v", err)
		}
	}
	tokens := 0
	for _, win := range w.Windows {
		tokens += len(win.IDs) - 1
	}
	for _, c := range w.Choices {
		tokens += len(c.Context)
		for _, o := range c.Options {
			tokens += len(o) - 1
		}
	}
	b.Run("runner", func(b *testing.B) {
		for range b.N {
			runScoring(b, s, tg, names)
		}
		b.ReportMetric(float64(len(w.Windows)), "windows")
		b.ReportMetric(float64(len(w.Choices)), "items")
	})
	b.Run("engine", func(b *testing.B) {
		for range b.N {
			if err := engineWork(tg.Model, w); err != nil {
				b.Fatal(err)
			}
		}
		b.ReportMetric(float64(tokens), "forward-tokens")
	})
}

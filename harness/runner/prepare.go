package runner

import (
	"bytes"
	"fmt"
	"io"
	"io/fs"
	"unicode/utf8"

	"sparsegate/harness/engine"
	"sparsegate/suites"
)

// A window is one forward pass over tokens [start, end) that scores the
// targets [first, end).
type window struct{ start, end, first int }

// prepared is a probe with its data read and checked.
type prepared struct {
	probe   *suites.Probe
	tokens  []int // text kinds: the encoded text
	windows []window
	items   []suites.Item
	pool    []suites.Item
	prompt  []int // speed: the prefill tokens
}

// prepare reads and checks a probe's data against the model it will run on.
func prepare(s *suites.Suite, p *suites.Probe, m *engine.Model) (*prepared, error) {
	pp := &prepared{probe: p}
	where := fmt.Sprintf("%s:%d:%d: probe %q", s.File, p.Line, p.Col, p.Name)
	if m.Tokenizer == nil && p.Kind != suites.Flips {
		return nil, inputErr("%s: the model in %s has no tokenizer; a suite needs one", where, m.Dir)
	}
	switch p.Kind {
	case suites.Perplexity, suites.Drift, suites.Sparsity, suites.Speed:
		text, err := readText(s.FS, p.Text, p.MaxBytes)
		if err != nil {
			return nil, inputErr("%s: %v", where, err)
		}
		pp.tokens = m.Tokenizer.EncodeForModel(string(text))
		if len(pp.tokens) < 2 {
			return nil, inputErr("%s: %s encodes to %d token; at least 2 are needed", where, p.Text, len(pp.tokens))
		}
		if p.Kind == suites.Speed {
			if p.PromptTokens+p.MaxTokens > m.Config.MaxPositions {
				return nil, inputErr("%s: prompt_tokens %d + max_tokens %d exceed the model's %d positions; lower them", where, p.PromptTokens, p.MaxTokens, m.Config.MaxPositions)
			}
			if len(pp.tokens) < p.PromptTokens {
				return nil, inputErr("%s: %s has %d tokens, fewer than prompt_tokens %d", where, p.Text, len(pp.tokens), p.PromptTokens)
			}
			pp.prompt = pp.tokens[:p.PromptTokens]
			break
		}
		win, stride := p.Window, p.Stride
		if win == 0 {
			win = min(m.Config.MaxPositions, 1024)
		}
		if win > m.Config.MaxPositions {
			return nil, inputErr("%s: window %d is longer than the model's context of %d positions; use at most %d", where, win, m.Config.MaxPositions, m.Config.MaxPositions)
		}
		if stride == 0 {
			stride = max(1, win/2)
		}
		pp.windows = windows(len(pp.tokens), win, stride)
	case suites.Choice, suites.Generation:
		items, err := suites.ReadItems(s.FS, p.Items, p.Kind)
		if err != nil {
			return nil, inputErr("%s: %v", where, err)
		}
		if p.Limit > 0 && p.Limit < len(items) {
			items = items[:p.Limit]
		}
		pp.items = items
		if p.Pool != "" {
			pool, err := suites.ReadItems(s.FS, p.Pool, p.Kind)
			if err != nil {
				return nil, inputErr("%s: %v", where, err)
			}
			pp.pool = pool
			for _, it := range items {
				if n := len(eligible(pool, &it)); n < p.Shots {
					return nil, inputErr("%s: %d shots, but the pool %s has only %d examples usable for item %q (an item is never its own example); lower shots or add examples", where, p.Shots, p.Pool, n, it.ID)
				}
			}
		}
		if err := fitsContext(pp, m, where); err != nil {
			return nil, err
		}
		if p.Kind == suites.Generation {
			for _, stop := range p.Stop {
				if !utf8.ValidString(stop) {
					return nil, inputErr("%s: a stop string is not valid UTF-8", where)
				}
			}
		}
	}
	return pp, nil
}

// fitsContext checks that every item's prompt, with its longest option
// (choice) or its whole token budget (generation), fits in the model's
// positions: past them a choice could not be scored and a generation would
// stop short and silently count as wrong.
func fitsContext(pp *prepared, m *engine.Model, where string) error {
	p, limit := pp.probe, m.Config.MaxPositions
	for i := range pp.items {
		it := &pp.items[i]
		n := len(m.Tokenizer.EncodeForModel(prompt(pp, it)))
		need, what := n+p.MaxTokens-1, fmt.Sprintf("+ max_tokens %d", p.MaxTokens)
		if p.Kind == suites.Choice {
			longest := 0
			for _, o := range it.Options {
				longest = max(longest, len(m.Tokenizer.Encode(o)))
			}
			need, what = n+longest-1, fmt.Sprintf("+ its longest option (%d tokens)", longest)
		}
		if need > limit {
			return inputErr("%s: item %q (%s line %d): its prompt of %d tokens (with %d shots) %s needs %d positions, more than the model's %d; shorten the context, lower shots or max_tokens",
				where, it.ID, p.Items, it.Line, n, p.Shots, what, need, limit)
		}
	}
	return nil
}

// MaxTextBytes caps a text probe's file when max_bytes is not set.
const MaxTextBytes = 256 << 20

// readText reads a probe's text, cut to maxBytes (back to a line end) when
// maxBytes > 0; it must be non-empty UTF-8.
func readText(fsys fs.FS, file string, maxBytes int) ([]byte, error) {
	f, err := fsys.Open(file)
	if err != nil {
		return nil, fmt.Errorf("reading %s: %v", file, err)
	}
	defer f.Close()
	limit := int64(MaxTextBytes) + 1
	if maxBytes > 0 {
		limit = int64(maxBytes) + 1 // one more, to know whether to cut
	}
	b, err := io.ReadAll(io.LimitReader(f, limit))
	if err != nil {
		return nil, fmt.Errorf("reading %s: %v", file, err)
	}
	if maxBytes == 0 && len(b) > MaxTextBytes {
		return nil, fmt.Errorf("%s is larger than %d bytes; set max_bytes to score a prefix of it", file, MaxTextBytes)
	}
	if maxBytes > 0 && len(b) > maxBytes {
		b = b[:maxBytes]
		if i := bytes.LastIndexByte(b, '\n'); i > 0 {
			b = b[:i+1]
		}
	}
	if len(bytes.TrimSpace(b)) == 0 {
		return nil, fmt.Errorf("%s is empty; a text probe needs text to score", file)
	}
	if !utf8.Valid(b) {
		return nil, fmt.Errorf("%s is not valid UTF-8 (first bad byte at offset %d); save it as UTF-8", file, suites.InvalidUTF8At(b))
	}
	return b, nil
}

// windows lays out sliding windows as engine.SlidingLogProbs does: windows
// of at most win tokens every stride tokens; each target is scored once, in
// the first window holding it with at least one token of context.
func windows(n, win, stride int) []window {
	var out []window
	scored := 1
	for start := 0; scored < n; start += stride {
		end := min(start+win, n)
		if end <= scored {
			continue
		}
		out = append(out, window{start, end, max(scored, start+1)})
		scored = end
	}
	return out
}

// eligible returns the pool examples that may precede item: never the item
// itself (same id or same context).
func eligible(pool []suites.Item, item *suites.Item) []int {
	var out []int
	for i := range pool {
		if pool[i].ID != item.ID && pool[i].Context != item.Context {
			out = append(out, i)
		}
	}
	return out
}

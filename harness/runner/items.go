package runner

import (
	"fmt"
	"hash/fnv"
	"math/rand/v2"
	"slices"
	"strings"

	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/suites"
)

// shots returns the few-shot examples for an item: Shots distinct pool
// examples (never the item itself) drawn by a PCG seeded with the probe's
// seed and a hash of the item id, so the draw depends on nothing else.
func shots(pp *prepared, it *suites.Item) []*suites.Item {
	k := pp.probe.Shots
	if k == 0 {
		return nil
	}
	h := fnv.New64a()
	h.Write([]byte(it.ID))
	r := rand.New(rand.NewPCG(pp.probe.Seed, h.Sum64()))
	idx := eligible(pp.pool, it)
	out := make([]*suites.Item, k)
	for i := range k { // partial Fisher–Yates
		j := i + r.IntN(len(idx)-i)
		idx[i], idx[j] = idx[j], idx[i]
		out[i] = &pp.pool[idx[i]]
	}
	return out
}

// Prompt returns the text a choice or generation item is scored on: its
// few-shot examples, each solved and followed by the separator, then the
// item's context.
func prompt(pp *prepared, it *suites.Item) string {
	var b strings.Builder
	for _, ex := range shots(pp, it) {
		b.WriteString(ex.Solved())
		b.WriteString(pp.probe.Separator)
	}
	b.WriteString(it.Context)
	return b.String()
}

// items runs a choice or generation probe on the subject (and on the base
// when both builds are given, for the per-item base outcome).
func (rc *runCtx) items(pp *prepared, pr *results.Probe) error {
	subj, err := rc.itemRecords(pp, rc.subject, rc.role)
	if err != nil {
		return err
	}
	if rc.base != nil && rc.cand != nil {
		base, err := rc.itemRecords(pp, rc.base, RoleBase)
		if err != nil {
			return fmt.Errorf("base: %w", err)
		}
		for i := range subj {
			bc := *base[i].Correct
			subj[i].BaseCorrect = &bc
		}
	}
	pr.Items = subj
	return nil
}

func (rc *runCtx) itemRecords(pp *prepared, t *Target, role string) ([]results.Item, error) {
	if role == RoleBase {
		if cached, ok := rc.cachedFor(pp, t); ok {
			return cached.Items, nil
		}
	}
	recs := make([]results.Item, len(pp.items))
	ran := make([]bool, len(pp.items))
	pc := &progressCounter{total: len(pp.items), prog: rc.progress(pp.probe.Name + " (" + role + ")")}
	err := forEach(lanes(t, len(pp.items)), len(pp.items), func(l lane, i int) error {
		it := &pp.items[i]
		if !inShard(rc.opts.Shard, pp.probe.Name, it.ID) {
			pc.step()
			return nil
		}
		var rec results.Item
		var err error
		if pp.probe.Kind == suites.Choice {
			rec, err = choose(l.model, l.hook, pp, it)
		} else {
			rec, err = generate(l.model, l.hook, pp, it)
		}
		if err != nil {
			return fmt.Errorf("item %q (%s line %d): %w", it.ID, pp.probe.Items, it.Line, err)
		}
		rec.ID, rec.Index = it.ID, i
		recs[i], ran[i] = rec, true
		pc.step()
		return nil
	})
	if err != nil {
		return nil, err
	}
	var out []results.Item
	for i, ok := range ran {
		if ok {
			out = append(out, recs[i])
		}
	}
	if role == RoleBase {
		rc.storeFor(pp, t, &results.Probe{Name: pp.probe.Name, Kind: pp.probe.Kind, Hash: pp.probe.Hash, Items: out})
	}
	return out, nil
}

// choose scores every option by its total log-likelihood after the prompt
// (or that total divided by the option's bytes) and picks the best; ties go
// to the lowest index.
func choose(m *engine.Model, hook engine.Hook, pp *prepared, it *suites.Item) (results.Item, error) {
	ctx := m.Tokenizer.EncodeForModel(prompt(pp, it))
	conts := make([][]int, len(it.Options))
	for i, o := range it.Options {
		conts[i] = m.Tokenizer.Encode(o)
		if len(conts[i]) == 0 {
			return results.Item{}, fmt.Errorf("option %d encodes to no tokens", i)
		}
	}
	scores, err := m.Continuations(ctx, conts, hook)
	if err != nil {
		return results.Item{}, err
	}
	gate := make([]float64, len(scores))
	for i, s := range scores {
		gate[i] = s.LogProb
		if pp.probe.Score == "per-byte" {
			gate[i] = s.LogProb / float64(len(it.Options[i]))
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
	margin := gate[best] - gate[second]
	correct := best == *it.Answer
	return results.Item{Chosen: &best, Margin: &margin, Correct: &correct}, nil
}

// generate decodes greedily after the prompt until a stop string or the
// token limit. Exact match compares the text with the target after trimming
// surrounding white space; prefix match asks that the trimmed text start
// with the trimmed target.
func generate(m *engine.Model, hook engine.Hook, pp *prepared, it *suites.Item) (results.Item, error) {
	ids := m.Tokenizer.EncodeForModel(prompt(pp, it))
	stops := make([][]byte, len(pp.probe.Stop))
	for i, s := range pp.probe.Stop {
		stops[i] = []byte(s)
	}
	g, err := m.Generate(ids, engine.GenerateOptions{MaxTokens: pp.probe.MaxTokens, Stop: stops, TokenBytes: m.Tokenizer.TokenBytes, Hook: hook})
	if err != nil {
		return results.Item{}, err
	}
	text := string(g.Text)
	got, want := strings.TrimSpace(text), strings.TrimSpace(it.Target)
	exact, prefix := got == want, strings.HasPrefix(got, want)
	return results.Item{Text: &text, Correct: &exact, Prefix: &prefix}, nil
}

// flips counts, over the items of the named probes (all choice and
// generation probes when none are named) that both builds ran, the items
// right on the base and wrong on the candidate, and the reverse.
func (rc *runCtx) flips(pp *prepared, pr *results.Probe) error {
	names := pp.probe.Of
	if len(names) == 0 {
		for _, p := range rc.s.Probes {
			if p.Kind == suites.Choice || p.Kind == suites.Generation {
				names = append(names, p.Name)
			}
		}
	}
	// Walk the sources in suite order (whatever order `of` names them in), so
	// that the items' indexes ascend as they are appended and Merge, which
	// sorts by index, rebuilds exactly this order; a name listed twice counts
	// once.
	offset := 0 // the item's index in the unsharded concatenation
	for _, p := range rc.s.Probes {
		if !slices.Contains(names, p.Name) {
			continue
		}
		name := p.Name
		src := rc.done[name]
		if src == nil {
			return fmt.Errorf("probe %q must come before this flips probe in the suite", name)
		}
		if src.Status != results.Ran {
			return fmt.Errorf("probe %q did not run (%s), so its flips cannot be counted", name, src.Status)
		}
		for _, it := range src.Items {
			if it.BaseCorrect == nil || it.Correct == nil {
				continue
			}
			c, b := *it.Correct, *it.BaseCorrect
			pr.Items = append(pr.Items, results.Item{ID: name + "/" + it.ID, Index: offset + it.Index, Correct: &c, BaseCorrect: &b})
		}
		offset += len(rc.preps[name].items)
	}
	return nil
}

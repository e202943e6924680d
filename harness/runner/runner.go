// Package runner executes a suite against a base and/or a candidate build
// and produces Results: it prepares every probe's data (so bad input is
// reported before any model runs), runs each probe kind on the engine, keeps
// a content-addressed cache of base results, and assigns items to shards by
// a stable hash so that any n shards together cover each item exactly once.
//
// # Metrics
//
// Every metric is computed from the per-item records, summed in item order,
// so merging shards (Merge) gives exactly the unsharded values:
//
//	perplexity     = exp(Σ NLL / Σ tokens)      over windows
//	mean_nll       = Σ NLL / Σ tokens
//	bits_per_byte  = Σ NLL / (ln 2 · Σ bytes)
//	accuracy       = right / items               (choice: best option is the answer)
//	margin_mean    = Σ (best − second best) / items
//	exact_match    = items whose generation equals the target / items
//	prefix_match   = items whose generation starts with the target / items
//	kl_mean        = Σ KL(base ‖ candidate) / tokens,   KL = Σ_v p_b(v) (ln p_b(v) − ln p_c(v))
//	kl_p95         = the 95th percentile (nearest rank) of the per-token KL
//	top1_agreement = tokens where both builds' most likely next token agree / tokens
//	lost, gained   = items right on the base and wrong on the candidate, and the reverse
//	flip_rate      = (lost + gained) / items compared
package runner

import (
	"errors"
	"fmt"
	"io"
	"slices"
	"time"

	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/sparsity"
	"sparsegate/harness/version"
	"sparsegate/suites"
)

// Roles of a target.
const (
	RoleBase      = "base"
	RoleCandidate = "candidate"
)

// A Target is one build a suite runs on: a checkpoint (dense or pruned) or a
// sparse build over its dense base.
type Target struct {
	// Model is the engine model to run (a sparse build's base).
	Model *engine.Model
	// Build is the sparse build, nil for a checkpoint.
	Build *sparsity.Build
	// Dense forces units of a sparse build to run dense (bisect).
	Dense map[sparsity.Unit]bool
	// Info describes the target in Results.
	Info results.Build
	// DenseBefore, when > 0, promises that layers before it run exactly as
	// in the dense base (bisect and sweep know it): perplexity and drift
	// windows then start from the base's cached residual stream at that
	// layer (Options.Memo) instead of recomputing those layers.
	DenseBefore int
}

// hook returns a fresh hook for one goroutine, or nil for a checkpoint.
func (t *Target) hook(stats *sparsity.Stats, recall bool) engine.Hook {
	return t.hookThreads(stats, recall, 0)
}

// hookThreads is hook with its batched scoring bounded to threads workers
// (0: the model's count).
func (t *Target) hookThreads(stats *sparsity.Stats, recall bool, threads int) engine.Hook {
	if t == nil || t.Build == nil {
		return nil
	}
	return t.Build.Hook(sparsity.HookOptions{Dense: t.Dense, Stats: stats, Recall: recall, Threads: threads})
}

// Options configure a run.
type Options struct {
	// Shard selects the items of this run (zero means 1/1).
	Shard results.Shard
	// Probes, when not empty, runs only the named probes (the others are
	// recorded as skipped).
	Probes []string
	// CacheDir, when set, holds cached base results.
	CacheDir string
	// Memo, when set, keeps base results in memory across runs.
	Memo *Memo
	// Progress is called as a probe advances (done of total units).
	Progress func(probe string, done, total int)
	// Log receives one line per finished probe (nil: none).
	Log io.Writer
	// Now measures time (speed probes, Seconds); nil means time.Now.
	Now func() time.Time
}

// ErrInput marks errors caused by the suite, its data or the builds (exit
// code 2), as opposed to internal faults.
var ErrInput = errors.New("bad input")

func inputErr(format string, args ...any) error {
	return fmt.Errorf("%w: %s", ErrInput, fmt.Sprintf(format, args...))
}

// Run runs the suite. base or cand may be nil (not both); the metrics
// describe the candidate when given, else the base. Probes that need both
// builds are skipped when one is missing. Data and parameters of every probe
// are checked before any model runs; a probe that fails while running (NaN
// logits, say) is recorded with status error, which fails any gate.
func Run(s *suites.Suite, base, cand *Target, opts Options) (*results.Results, error) {
	if base == nil && cand == nil {
		return nil, inputErr("nothing to run: give a base, a candidate or both")
	}
	if opts.Shard.Count == 0 {
		opts.Shard = results.Shard{Index: 1, Count: 1}
	}
	if opts.Shard.Count < 1 || opts.Shard.Index < 1 || opts.Shard.Index > opts.Shard.Count {
		return nil, inputErr("shard %d/%d: use i/n with 1 ≤ i ≤ n", opts.Shard.Index, opts.Shard.Count)
	}
	if opts.Now == nil {
		opts.Now = time.Now
	}
	for _, name := range opts.Probes {
		if s.Probe(name) == nil {
			return nil, inputErr("%s: no probe named %q", s.File, name)
		}
	}
	opts.Probes = withSources(s, opts.Probes)
	if base != nil && cand != nil {
		if err := sameTokenizer(base, cand); err != nil {
			return nil, err
		}
	}
	subject, subjectRole := cand, RoleCandidate
	if cand == nil {
		subject, subjectRole = base, RoleBase
	}
	r := &results.Results{Schema: results.Schema, Harness: version.Version,
		Suite: results.SuiteRef{Name: s.Name, File: s.File, Hash: s.Hash}, Shard: opts.Shard}
	if base != nil {
		info := base.Info
		r.Base = &info
	}
	if cand != nil {
		info := cand.Info
		r.Candidate = &info
	}
	// Prepare everything first: bad data is reported before minutes of work.
	preps := make([]*prepared, len(s.Probes))
	for i, p := range s.Probes {
		pp, err := prepare(s, p, subject.Model)
		if err != nil {
			return nil, err
		}
		preps[i] = pp
	}
	rc := &runCtx{s: s, base: base, cand: cand, subject: subject, role: subjectRole, opts: opts,
		done: map[string]*results.Probe{}, preps: map[string]*prepared{}}
	for _, pp := range preps {
		rc.preps[pp.probe.Name] = pp
	}
	for i, p := range s.Probes {
		pr := &results.Probe{Name: p.Name, Kind: p.Kind, Hash: p.Hash, Metrics: []results.Metric{}}
		start := opts.Now()
		switch {
		case len(opts.Probes) > 0 && !slices.Contains(opts.Probes, p.Name):
			pr.Status, pr.Note = results.Skipped, "not selected"
		default:
			rc.runProbe(preps[i], pr)
		}
		pr.Seconds = opts.Now().Sub(start).Seconds()
		if pr.Status == results.Ran {
			pr.Subject = subjectRole
		}
		r.Probes = append(r.Probes, pr)
		rc.done[p.Name] = pr
		if opts.Log != nil {
			fmt.Fprintln(opts.Log, probeLine(pr))
		}
	}
	return r, nil
}

// withSources adds to a selection of probes the choice and generation probes
// that a selected flips probe counts.
func withSources(s *suites.Suite, sel []string) []string {
	if len(sel) == 0 {
		return sel
	}
	out := append([]string(nil), sel...)
	for _, name := range sel {
		p := s.Probe(name)
		if p.Kind != suites.Flips {
			continue
		}
		for _, q := range s.Probes {
			if (q.Kind == suites.Choice || q.Kind == suites.Generation) && (len(p.Of) == 0 || slices.Contains(p.Of, q.Name)) && !slices.Contains(out, q.Name) {
				out = append(out, q.Name)
			}
		}
	}
	return out
}

func sameTokenizer(base, cand *Target) error {
	bt, ct := base.Model.Tokenizer, cand.Model.Tokenizer
	if bt == nil || ct == nil {
		return inputErr("both builds need a tokenizer (tokenizer.json or vocab.json + merges.txt)")
	}
	if bt.SHA256() != ct.SHA256() {
		return inputErr("the base (%s) and the candidate (%s) have different tokenizers; drift, flips and paired comparisons need the same one", base.Info.Path, cand.Info.Path)
	}
	if base.Model.Config.VocabSize != cand.Model.Config.VocabSize {
		return inputErr("the base has %d vocabulary entries and the candidate %d", base.Model.Config.VocabSize, cand.Model.Config.VocabSize)
	}
	return nil
}

type runCtx struct {
	s          *suites.Suite
	base, cand *Target
	subject    *Target
	role       string
	opts       Options
	done       map[string]*results.Probe
	preps      map[string]*prepared
}

func (rc *runCtx) progress(probe string) func(done, total int) {
	if rc.opts.Progress == nil {
		return func(int, int) {}
	}
	return func(d, t int) { rc.opts.Progress(probe, d, t) }
}

// runProbe runs one prepared probe into pr, recording errors in it.
func (rc *runCtx) runProbe(pp *prepared, pr *results.Probe) {
	p := pp.probe
	needBoth := p.Kind == suites.Drift || p.Kind == suites.Flips || p.Kind == suites.Speed
	if needBoth && (rc.base == nil || rc.cand == nil) {
		pr.Status, pr.Note = results.Skipped, "needs both a base and a candidate"
		return
	}
	if p.Kind == suites.Sparsity && (rc.cand == nil || rc.cand.Build == nil) {
		pr.Status, pr.Note = results.Skipped, "needs a sparse candidate build"
		return
	}
	if (p.Kind == suites.Sparsity || p.Kind == suites.Speed) && !inShard(rc.opts.Shard, p.Name, "") {
		pr.Status, pr.Note = results.Skipped, fmt.Sprintf("runs in another shard than %d/%d", rc.opts.Shard.Index, rc.opts.Shard.Count)
		return
	}
	var err error
	switch p.Kind {
	case suites.Perplexity:
		err = rc.perplexity(pp, pr)
	case suites.Drift:
		err = rc.drift(pp, pr)
	case suites.Choice, suites.Generation:
		err = rc.items(pp, pr)
	case suites.Flips:
		err = rc.flips(pp, pr)
	case suites.Sparsity:
		err = rc.sparsity(pp, pr)
	case suites.Speed:
		err = rc.speed(pp, pr)
	default:
		err = fmt.Errorf("internal: no runner for kind %q", p.Kind)
	}
	if err != nil {
		pr.Status, pr.Note = results.Failed, err.Error()
		pr.Metrics, pr.Items, pr.Units = []results.Metric{}, nil, nil
		return
	}
	pr.Status = results.Ran
	if err := Recompute(pr); err != nil {
		pr.Status, pr.Note = results.Failed, err.Error()
	}
}

func probeLine(p *results.Probe) string {
	switch p.Status {
	case results.Ran:
		s := fmt.Sprintf("probe %s (%s): %d items in %.1fs", p.Name, p.Kind, len(p.Items), p.Seconds)
		for _, m := range p.Metrics {
			s += fmt.Sprintf(" %s=%.4g", m.Name, m.Value)
		}
		return s
	default:
		return fmt.Sprintf("probe %s (%s): %s: %s", p.Name, p.Kind, p.Status, p.Note)
	}
}

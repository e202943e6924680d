package golden

import (
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/harness/stats"
	"sparsegate/harness/version"
	"sparsegate/suites"
)

// Options tune a comparison.
type Options struct {
	// AllowNew lets new (no golden yet) and missing (golden without a result)
	// values pass the gate.
	AllowNew bool
	// MarginMove is the smallest margin change of a choice item that is
	// listed among the changes (default 1 nat).
	MarginMove float64
	// NLLMove is the smallest change of a window's mean NLL per token that is
	// listed among the changes (default 0.05 nats).
	NLLMove float64
}

// BootstrapSeed seeds every paired bootstrap, so verdicts are reproducible.
const BootstrapSeed = 20261201

// Compare compares Results with the golden files in dir, probe by probe and
// metric by metric, with the tolerances the suite declares. A golden file
// that does not parse, or a golden directory that is a symbolic link, is an
// error; everything else is an outcome in the Verdict.
func Compare(s *suites.Suite, r *results.Results, dir string, opts Options) (*Verdict, error) {
	if opts.MarginMove == 0 {
		opts.MarginMove = 1
	}
	if opts.NLLMove == 0 {
		opts.NLLMove = 0.05
	}
	if r.Suite.Hash != s.Hash {
		return nil, fmt.Errorf("the results were produced by suite %s with hash %.12s…, but %s now hashes to %.12s…; re-run the suite", r.Suite.File, r.Suite.Hash, s.File, s.Hash)
	}
	if err := CheckDir(dir, false); err != nil {
		return nil, err
	}
	if err := Recover(dir); err != nil {
		return nil, err
	}
	v := &Verdict{Schema: VerdictSchema, Harness: version.Version, Suite: r.Suite, GoldenDir: dir, AllowNew: opts.AllowNew,
		Fingerprint: FingerprintOf(r, nil), Shard: r.Shard, Outcome: Pass}
	for _, p := range s.Probes {
		rp := r.Probe(p.Name)
		if rp == nil {
			return nil, fmt.Errorf("the results have no probe %q of suite %s; re-run the suite", p.Name, s.File)
		}
		g, err := readIfExists(Path(dir, p.Name))
		if err != nil {
			return nil, err
		}
		if g != nil && g.Kind != p.Kind {
			return nil, fmt.Errorf("%s: the golden file is for a %s probe, but the suite's probe %q is %s; re-record it with --rebase", Path(dir, p.Name), g.Kind, p.Name, p.Kind)
		}
		if g != nil && v.GoldenFingerprint == nil {
			fp := g.Fingerprint
			fp.Probe = ""
			v.GoldenFingerprint = &fp
		}
		pv := compareProbe(p, rp, g, r.Shard, opts)
		v.Probes = append(v.Probes, pv)
		v.Outcome = Worse(v.Outcome, pv.Outcome)
	}
	// Golden files of probes the suite no longer has are missing results.
	entries, err := os.ReadDir(dir)
	if err != nil && !errors.Is(err, fs.ErrNotExist) {
		return nil, fmt.Errorf("reading golden directory: %w", err)
	}
	for _, e := range entries {
		name, ok := strings.CutSuffix(e.Name(), Ext)
		if !ok || s.Probe(name) != nil {
			continue
		}
		kind := ""
		if g, err := ReadFile(filepath.Join(dir, e.Name())); err == nil {
			kind = g.Kind
		}
		pv := &ProbeVerdict{Name: name, Kind: kind, Outcome: Missing, Metrics: []*MetricVerdict{},
			Note: fmt.Sprintf("%s has a golden file but the suite has no such probe; remove the file in an approved update if the probe was dropped", filepath.Join(dir, e.Name()))}
		v.Probes = append(v.Probes, pv)
		v.Outcome = Worse(v.Outcome, Missing)
	}
	v.Passed = true
	for _, pv := range v.Probes {
		if pv.Outcome.Failing(opts.AllowNew) {
			v.Passed = false
		}
	}
	return v, nil
}

// CheckDir refuses a golden directory that is a symbolic link (it could
// point out of the project) or not a directory; a missing one is fine unless
// mustExist.
func CheckDir(dir string, mustExist bool) error {
	st, err := os.Lstat(dir)
	if errors.Is(err, fs.ErrNotExist) && !mustExist {
		return nil
	}
	if err != nil {
		return fmt.Errorf("golden directory: %w", err)
	}
	if st.Mode()&os.ModeSymlink != 0 {
		return fmt.Errorf("golden directory %s is a symbolic link; use the real directory (a link can lead golden files out of the project)", dir)
	}
	if !st.IsDir() {
		return fmt.Errorf("golden directory %s is not a directory", dir)
	}
	return nil
}

func readIfExists(path string) (*File, error) {
	if _, err := os.Lstat(path); errors.Is(err, fs.ErrNotExist) {
		return nil, nil
	}
	return ReadFile(path)
}

// goldenView restricts a golden record to one shard's items and recomputes
// its item-based metrics, so a shard compares like with like.
func goldenView(g *File, kind string, sh results.Shard) (*results.Probe, error) {
	p := &results.Probe{Name: g.Probe, Kind: g.Kind, Metrics: slices.Clone(g.Metrics), Items: g.Items, Units: g.Units}
	if sh.Count <= 1 || kind == suites.Sparsity || kind == suites.Speed {
		return p, nil
	}
	var items []results.Item
	for _, it := range g.Items {
		id := it.ID
		if kind == suites.Flips {
			continue // flips items are counted from the choice/generation items of the same shard
		}
		if runner.ShardOf(g.Probe, id, sh.Count) == sh.Index {
			items = append(items, it)
		}
	}
	if kind == suites.Flips {
		for _, it := range g.Items {
			src, id, _ := strings.Cut(it.ID, "/")
			if runner.ShardOf(src, id, sh.Count) == sh.Index {
				items = append(items, it)
			}
		}
	}
	p.Items = items
	if err := runner.Recompute(p); err != nil {
		return nil, err
	}
	return p, nil
}

func compareProbe(p *suites.Probe, rp *results.Probe, g *File, sh results.Shard, opts Options) *ProbeVerdict {
	pv := &ProbeVerdict{Name: p.Name, Kind: p.Kind, Seconds: rp.Seconds, Units: rp.Units, Metrics: []*MetricVerdict{}, Items: len(rp.Items)}
	switch rp.Status {
	case results.Failed:
		pv.Outcome, pv.Note = Error, "the probe could not run: "+rp.Note
		return pv
	case results.Skipped:
		pv.Outcome, pv.Note = Skipped, rp.Note
		return pv
	}
	var gp *results.Probe
	if g != nil {
		var err error
		if gp, err = goldenView(g, p.Kind, sh); err != nil {
			pv.Outcome, pv.Note = Error, fmt.Sprintf("golden file %s: %v", g.Probe, err)
			return pv
		}
		if g.Fingerprint.Probe != "" && g.Fingerprint.Probe != rp.Hash {
			pv.Note = "the probe's definition or data changed since the golden file was recorded"
		}
	} else {
		pv.Note = "no golden file yet; record one with 'sparsegate golden update'"
	}
	pairs := pairItems(gp, rp)
	pv.Outcome = Pass
	gated := map[string]bool{}
	for i := range p.Gate {
		t := &p.Gate[i]
		gated[t.Metric] = true
		mv := compareMetric(p, t, gp, rp, pairs)
		pv.Metrics = append(pv.Metrics, mv)
		pv.Outcome = Worse(pv.Outcome, mv.Outcome)
	}
	// Ungated metrics are reported for context and never fail.
	var names []string
	for _, m := range rp.Metrics {
		names = append(names, m.Name)
	}
	if gp != nil {
		for _, m := range gp.Metrics {
			names = append(names, m.Name)
		}
	}
	slices.Sort(names)
	for _, name := range slices.Compact(names) {
		if gated[name] {
			continue
		}
		info, _ := suites.Metric(p.Kind, name)
		mv := &MetricVerdict{Metric: name, Better: info.Better, Nondeterministic: info.Nondeterministic, Outcome: Pass, Tolerance: "not gated"}
		setValues(mv, gp, rp)
		pv.Metrics = append(pv.Metrics, mv)
	}
	if gp != nil {
		pv.Changes = changes(p.Kind, pairs, opts)
	}
	return pv
}

// pair is one item in golden and result (either may be nil).
type pair struct{ g, r *results.Item }

// pairItems pairs items by id, in result order, then golden-only items.
func pairItems(gp, rp *results.Probe) []pair {
	if gp == nil {
		return nil
	}
	gi := map[string]*results.Item{}
	for i := range gp.Items {
		gi[gp.Items[i].ID] = &gp.Items[i]
	}
	var out []pair
	seen := map[string]bool{}
	for i := range rp.Items {
		it := &rp.Items[i]
		out = append(out, pair{gi[it.ID], it})
		seen[it.ID] = true
	}
	for i := range gp.Items {
		if !seen[gp.Items[i].ID] {
			out = append(out, pair{&gp.Items[i], nil})
		}
	}
	return out
}

func setValues(mv *MetricVerdict, gp, rp *results.Probe) {
	if m := rp.Metric(mv.Metric); m != nil {
		c := m.Value
		mv.Candidate = &c
	}
	if gp != nil {
		if m := gp.Metric(mv.Metric); m != nil {
			g := m.Value
			mv.Golden = &g
		}
	}
	if mv.Golden != nil && mv.Candidate != nil {
		d := *mv.Candidate - *mv.Golden
		mv.Delta = &d
	}
}

func describe(t *suites.Tolerance) string {
	s := fmt.Sprintf("%s is better; worse by at most max(abs %s, rel %s·|golden|)", t.Better, ff(t.Abs), ff(t.Rel))
	if t.MaxFlips >= 0 {
		s += fmt.Sprintf(", at most %d items lost", t.MaxFlips)
	}
	if t.MaxFlipFraction >= 0 {
		s += fmt.Sprintf(", at most %s of items lost", ff(t.MaxFlipFraction))
	}
	if t.Test != suites.TestNone {
		s += fmt.Sprintf(", %s at α=%s", t.Test, ff(t.Alpha))
	}
	return s + ", fails if " + t.FailIf
}

func compareMetric(p *suites.Probe, t *suites.Tolerance, gp, rp *results.Probe, pairs []pair) *MetricVerdict {
	info, _ := suites.Metric(p.Kind, t.Metric)
	mv := &MetricVerdict{Metric: t.Metric, Gated: true, Better: t.Better, Tolerance: describe(t), Nondeterministic: info.Nondeterministic}
	setValues(mv, gp, rp)
	switch {
	case mv.Candidate == nil:
		if rm := rp.Metric(t.Metric); rm == nil {
			mv.Outcome, mv.Note = Missing, "the run produced no value for this metric"
			if gp == nil {
				mv.Outcome = New
			}
			return mv
		}
	case math.IsNaN(*mv.Candidate) || math.IsInf(*mv.Candidate, 0):
		mv.Outcome, mv.Note = Error, fmt.Sprintf("the value is %v", *mv.Candidate)
		return mv
	}
	if gp == nil {
		mv.Outcome, mv.Note = New, "no golden value yet"
		return mv
	}
	if mv.Golden == nil {
		mv.Outcome, mv.Note = New, "the golden file has no value for this metric"
		return mv
	}
	g, c := *mv.Golden, *mv.Candidate
	mv.Bound = t.Bound(g)
	worse := t.WorseBy(g, c)
	large := worse > mv.Bound
	improved := -worse > mv.Bound
	// Per-item outcomes against golden.
	n := 0
	if slices.Contains(info.Tests, suites.TestMcNemar) {
		for _, pr := range pairs {
			if pr.g == nil || pr.r == nil || pr.g.Correct == nil || pr.r.Correct == nil {
				continue
			}
			gc, rc := *pr.g.Correct, *pr.r.Correct
			if t.Metric == "prefix_match" {
				if pr.g.Prefix == nil || pr.r.Prefix == nil {
					continue
				}
				gc, rc = *pr.g.Prefix, *pr.r.Prefix
			}
			n++
			switch {
			case gc && !rc:
				mv.Lost++
			case !gc && rc:
				mv.Gained++
			}
		}
	}
	significant := false
	var notes []string
	switch t.Test {
	case suites.TestMcNemar:
		mn := stats.McNemarTest(mv.Lost, mv.Gained)
		st, pv := mn.Statistic, mn.ExactP
		mv.Test, mv.Statistic, mv.P = "mcnemar-exact", &st, &pv
		significant = pv < t.Alpha && mv.Lost > mv.Gained
		if n > 0 && t.Power < 0.5 {
			// Connor's formula is not monotone below power 0.5, so
			// MinDetectable refuses it (it panics); say so instead.
			mv.PowerWarning = fmt.Sprintf("power %s is below 0.5, so no power check was made: set power to 0.5 or more (0.8 is usual)", ff(t.Power))
		} else if n > 0 {
			psi := max(float64(mv.Lost+mv.Gained)/float64(n), mv.Bound)
			md, ok := stats.MinDetectable(n, min(psi, 1), t.Alpha, t.Power)
			if !ok || md > mv.Bound {
				mv.PowerWarning = fmt.Sprintf("with %d paired items and a disagreement rate of %.3g, McNemar's test detects only changes of %.3g or more at %.0f%% power (α=%s), more than the tolerance %.3g: add items or widen the tolerance",
					n, float64(mv.Lost+mv.Gained)/float64(n), md, 100*t.Power, ff(t.Alpha), mv.Bound)
			}
		}
	case suites.TestBootstrap:
		iv, ok := bootstrap(t, pairs)
		if ok {
			lo, hi, pv := iv.Lo, iv.Hi, iv.P
			mv.Test, mv.CILo, mv.CIHi, mv.P = "paired-bootstrap", &lo, &hi, &pv
			est := iv.Estimate
			mv.Statistic = &est
			if t.Better == suites.LowerIsBetter {
				significant = lo > 0
			} else {
				significant = hi < 0
			}
			if (hi-lo)/2 > mv.Bound {
				mv.PowerWarning = fmt.Sprintf("the %d paired windows give a %.0f%% interval of ±%.3g, wider than the tolerance %.3g: a regression of the tolerance's size may not show as significant; score more text",
					countPaired(pairs), 100*(1-t.Alpha), (hi-lo)/2, mv.Bound)
			}
		} else {
			notes = append(notes, "no paired windows for the bootstrap (the golden file and the run share no window ids)")
		}
	}
	var fail bool
	switch t.FailIf {
	case suites.FailIfLarge:
		fail = large
	case suites.FailIfSignificant:
		fail = significant
	case suites.FailIfBoth:
		fail = large && significant
	case suites.FailIfEither:
		fail = large || significant
	}
	if large {
		notes = append(notes, fmt.Sprintf("worse by %.4g, beyond the bound %.4g", worse, mv.Bound))
	}
	if significant {
		notes = append(notes, fmt.Sprintf("significant (p=%.3g < α=%s)", *mv.P, ff(t.Alpha)))
	}
	if t.MaxFlips >= 0 && mv.Lost > t.MaxFlips {
		fail = true
		notes = append(notes, fmt.Sprintf("%d items lost, more than the cap of %d", mv.Lost, t.MaxFlips))
	}
	if t.MaxFlipFraction >= 0 && n > 0 && float64(mv.Lost)/float64(n) > t.MaxFlipFraction {
		fail = true
		notes = append(notes, fmt.Sprintf("%d of %d items lost, more than the cap of %s", mv.Lost, n, ff(t.MaxFlipFraction)))
	}
	switch {
	case fail:
		mv.Outcome = Fail
	case improved:
		mv.Outcome = Improved
		notes = append(notes, fmt.Sprintf("better by %.4g, beyond the bound %.4g", -worse, mv.Bound))
	default:
		mv.Outcome = Pass
		if large || significant {
			notes = append(notes, "not failed: the suite fails this metric only if "+t.FailIf)
		}
	}
	mv.Note = strings.Join(notes, "; ")
	return mv
}

func countPaired(pairs []pair) int {
	n := 0
	for _, p := range pairs {
		if p.g != nil && p.r != nil && p.g.NLL != nil && p.r.NLL != nil {
			n++
		}
	}
	return n
}

// bootstrap resamples the paired windows and returns the interval of the
// metric's difference (candidate − golden) on the metric's own scale.
func bootstrap(t *suites.Tolerance, pairs []pair) (stats.Interval, bool) {
	var ga, gd, ca, cd []float64
	for _, p := range pairs {
		if p.g == nil || p.r == nil || p.g.NLL == nil || p.r.NLL == nil || p.g.Tokens == nil || p.r.Tokens == nil {
			continue
		}
		den := func(it *results.Item) float64 {
			if t.Metric == "bits_per_byte" && it.Bytes != nil {
				return float64(*it.Bytes) * math.Ln2
			}
			return float64(*it.Tokens)
		}
		ga, gd = append(ga, *p.g.NLL), append(gd, den(p.g))
		ca, cd = append(ca, *p.r.NLL), append(cd, den(p.r))
	}
	if len(ga) == 0 {
		return stats.Interval{}, false
	}
	diff := stats.RatioDiff(ga, gd, ca, cd)
	stat := diff
	if t.Metric == "perplexity" {
		ratio := func(num, den []float64, counts []int) float64 {
			a, b := 0.0, 0.0
			for i, w := range counts {
				a += float64(w) * num[i]
				b += float64(w) * den[i]
			}
			return a / b
		}
		stat = func(counts []int) float64 {
			return math.Exp(ratio(ca, cd, counts)) - math.Exp(ratio(ga, gd, counts))
		}
	}
	iv, err := stats.PairedBootstrap(len(ga), t.Resamples, BootstrapSeed, 1-t.Alpha, stat)
	if err != nil {
		return stats.Interval{}, false
	}
	return iv, true
}

// changes lists the items whose record differs from golden, in item order.
func changes(kind string, pairs []pair, opts Options) []ItemChange {
	var out []ItemChange
	for _, p := range pairs {
		switch {
		case p.r == nil:
			out = append(out, ItemChange{ID: p.g.ID, Index: p.g.Index, Change: Dropped})
			continue
		case p.g == nil:
			out = append(out, ItemChange{ID: p.r.ID, Index: p.r.Index, Change: Added})
			continue
		}
		g, r := p.g, p.r
		c := ItemChange{ID: r.ID, Index: r.Index, GoldenChosen: g.Chosen, CandidateChosen: r.Chosen, GoldenMargin: g.Margin, CandidateMargin: r.Margin,
			GoldenText: g.Text, CandidateText: r.Text}
		switch kind {
		case suites.Choice, suites.Generation:
			if g.Correct == nil || r.Correct == nil {
				continue
			}
			switch {
			case *g.Correct && !*r.Correct:
				c.Change = Lost
			case !*g.Correct && *r.Correct:
				c.Change = Gained
			case g.Chosen != nil && r.Chosen != nil && *g.Chosen != *r.Chosen:
				c.Change = Changed
			case g.Text != nil && r.Text != nil && *g.Text != *r.Text:
				c.Change = Changed
			case g.Margin != nil && r.Margin != nil && math.Abs(*r.Margin-*g.Margin) >= opts.MarginMove:
				c.Change = Moved
			default:
				continue
			}
		case suites.Perplexity:
			if g.NLL == nil || r.NLL == nil || g.Tokens == nil || r.Tokens == nil || *g.Tokens == 0 || *r.Tokens == 0 {
				continue
			}
			gm, rm := *g.NLL/float64(*g.Tokens), *r.NLL/float64(*r.Tokens)
			if math.Abs(rm-gm) < opts.NLLMove {
				continue
			}
			c = ItemChange{ID: r.ID, Index: r.Index, Change: Moved, GoldenNLL: &gm, CandidateNLL: &rm}
		default:
			continue
		}
		out = append(out, c)
	}
	slices.SortStableFunc(out, func(a, b ItemChange) int { return a.Index - b.Index })
	return out
}

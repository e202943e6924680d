package main

import (
	"fmt"
	"math"
	"os"
	"strings"

	"sparsegate/golden"
	"sparsegate/harness/bisect"
	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/harness/sparsity"
	"sparsegate/suites"
)

const bisectUsage = `usage: sparsegate bisect --suite S --candidate BUILD [--base DIR] [--golden DIR] [--probe P ...] [flags]

Find which layer components' masks make a candidate fail its gate: the
failing probes are rerun with chosen units (layer, mlp|attention) switched
back to dense, and delta debugging finds a smallest set of units that still
fails (a binary split when there is one culprit). Every step is logged. For
a pruned checkpoint, a unit is a layer component taken from the candidate
while the rest comes from the base. Sparsity and speed probes are left out:
they measure the masks themselves.

Without --golden the reference is the run with every unit dense.

flags:
  --suite SUITE      suite file or built-in name (default demo)
  --candidate BUILD  the failing build (required)
  --base DIR         dense base (default: the build's base)
  --golden DIR       golden directory to gate against
  --probe NAME       probes to search with (default: those that fail)
  --json FILE        verdict of the candidate with per-unit sensitivity
  --html FILE        HTML report with the sensitivity chart
  --threads N        kernel threads
  --cache DIR, --no-cache   base-result cache (see 'run')
  --no-prefix-cache  recompute the layers before the first sparse unit in
                     every step (by default perplexity and drift windows start
                     from the base's residual stream there, kept in memory)

exit codes: 0 culprits found or nothing to bisect, 1 the failure is not in
the masks, 2 bad input, 3 a step could not run

example:
  sparsegate bisect --suite demo --candidate ./builds/rc8 --golden golden/demo
`

const sweepUsage = `usage: sparsegate sweep --suite S --candidate BUILD [--base DIR] [--probe P ...] [--only-dense] [flags]

For each unit (layer, mlp|attention) the build makes sparse, run the probes
with only that unit sparse (the rest dense), and with --only-dense also with
only that unit dense (the rest sparse). Prints each gated metric's value and
its change from the all-dense run; --json and --html carry the table to the
report's sensitivity chart. Useful to pick per-layer budgets.

flags:
  --suite, --candidate, --base, --probe, --threads, --cache, --no-cache as for bisect
  --only-dense       also measure each unit dense with the rest sparse
  --no-prefix-cache  recompute the dense layers before the first sparse unit
  --json FILE        verdict JSON with the sensitivity rows
  --html FILE        HTML report with the sensitivity chart

example:
  sparsegate sweep --suite demo --candidate ./builds/rc8 --probe heldout-ppl
`

// unitSearch runs probes of a suite with a chosen set of units sparse.
type unitSearch struct {
	c        *cli
	s        *session
	units    []sparsity.Unit
	probes   []string
	golden   string // golden directory compared against
	verdict  map[string]*golden.Verdict
	noPrefix bool // recompute the dense layers before the first sparse unit
}

func (u *unitSearch) key(set []int) string { return fmt.Sprint(set) }

// target returns the candidate with exactly the units in set sparse.
func (u *unitSearch) target(set []int) (*runner.Target, error) {
	sparse := map[sparsity.Unit]bool{}
	for _, i := range set {
		sparse[u.units[i]] = true
	}
	cand := u.s.cand
	t := &runner.Target{Model: cand.Model, Build: cand.Build, Info: cand.Info}
	if !u.noPrefix && len(set) > 0 {
		// Layers before the first sparse unit run as in the base: start there.
		t.DenseBefore = u.units[set[0]].Layer
		for _, i := range set {
			t.DenseBefore = min(t.DenseBefore, u.units[i].Layer)
		}
	}
	var dense []string
	for _, unit := range u.units {
		if !sparse[unit] {
			dense = append(dense, unit.String())
		}
	}
	t.Info.Dense = dense
	if cand.Build != nil {
		t.Dense = map[sparsity.Unit]bool{}
		for _, unit := range u.units {
			if !sparse[unit] {
				t.Dense[unit] = true
			}
		}
		return t, nil
	}
	h, err := engine.Hybrid(u.s.base.Model, cand.Model, func(l int, mlp bool) bool {
		c := sparsity.Attention
		if mlp {
			c = sparsity.MLP
		}
		return sparse[sparsity.Unit{Layer: l, Component: c}]
	})
	if err != nil {
		return nil, err
	}
	t.Model = h
	return t, nil
}

// run runs the probes with set sparse and compares them.
func (u *unitSearch) run(set []int) (*golden.Verdict, *results.Results, error) {
	t, err := u.target(set)
	if err != nil {
		return nil, nil, err
	}
	opts := u.s.opts
	opts.Probes, opts.Log, opts.Progress = u.probes, nil, nil
	r, err := runner.Run(u.s.suite, u.s.base, t, opts)
	if err != nil {
		return nil, nil, err
	}
	v, err := golden.Compare(u.s.suite, r, u.golden, golden.Options{})
	if err != nil {
		return nil, nil, err
	}
	u.verdict[u.key(set)] = v
	return v, r, nil
}

// headline returns the first failing gated metric of a verdict, or the first
// gated one.
func headline(v *golden.Verdict) (string, *golden.MetricVerdict) {
	var first *golden.MetricVerdict
	var fp string
	for _, p := range v.Probes {
		for _, m := range p.Metrics {
			if !m.Gated || m.Candidate == nil {
				continue
			}
			if m.Outcome == golden.Fail || m.Outcome == golden.Error {
				return p.Name, m
			}
			if first == nil {
				first, fp = m, p.Name
			}
		}
	}
	return fp, first
}

func describeMetric(probe string, m *golden.MetricVerdict) string {
	if m == nil {
		return ""
	}
	s := fmt.Sprintf("%s %s %.5g", probe, m.Metric, *m.Candidate)
	if m.Golden != nil {
		s += fmt.Sprintf(" (golden %.5g)", *m.Golden)
	}
	return s
}

// setup opens the builds, lists the units and picks the probes.
func setupSearch(c *cli, cmd string, f *runFlags, goldenDir string, noPrefix bool) (*unitSearch, func(), error) {
	if f.candidate == "" {
		return nil, nil, usageError(cmd, "--candidate BUILD is required")
	}
	s, err := f.open(c, cmd)
	if err != nil {
		return nil, nil, err
	}
	u := &unitSearch{c: c, s: s, verdict: map[string]*golden.Verdict{}, golden: goldenDir, noPrefix: noPrefix}
	cleanup := s.close
	fail := func(err error) (*unitSearch, func(), error) { cleanup(); return nil, nil, err }
	if s.cand.Build != nil {
		u.units = s.cand.Build.Units()
	} else {
		if s.base == nil {
			return fail(usageError(cmd, "a checkpoint candidate needs --base DIR"))
		}
		for l := range s.cand.Model.Config.Layers {
			for _, comp := range sparsity.Components() {
				if !engine.SameUnit(s.base.Model, s.cand.Model, l, comp == sparsity.MLP) {
					u.units = append(u.units, sparsity.Unit{Layer: l, Component: comp})
				}
			}
		}
	}
	if len(u.units) == 0 {
		return fail(fmt.Errorf("%s has no sparse units (every layer component runs as in the base); there is nothing to bisect", f.candidate))
	}
	for _, name := range f.probes {
		p := u.s.suite.Probe(name)
		if p == nil {
			return fail(usageError(cmd, "the suite has no probe %q", name))
		}
		if p.Kind == suites.Sparsity || p.Kind == suites.Speed {
			return fail(usageError(cmd, "probe %q is a %s probe; bisect and sweep use quality probes", name, p.Kind))
		}
	}
	u.probes = f.probes
	if len(u.probes) == 0 {
		for _, p := range u.s.suite.Probes {
			if p.Kind != suites.Sparsity && p.Kind != suites.Speed {
				u.probes = append(u.probes, p.Name)
			}
		}
	}
	if u.golden == "" {
		// The reference is the all-dense run, recorded as a temporary golden directory.
		dir, err := os.MkdirTemp("", "sparsegate-reference-")
		if err != nil {
			return fail(err)
		}
		prev := cleanup
		cleanup = func() { os.RemoveAll(dir); prev() }
		t, err := u.target(nil)
		if err != nil {
			return fail(err)
		}
		opts := s.opts
		opts.Probes, opts.Log, opts.Progress = u.probes, nil, nil
		r, err := runner.Run(s.suite, s.base, t, opts)
		if err != nil {
			return fail(err)
		}
		for _, p := range r.Probes {
			if p.Status == results.Ran {
				data, err := golden.FromResults(r, p).Encode()
				if err != nil {
					return fail(err)
				}
				if err := os.WriteFile(golden.Path(dir, p.Name), data, 0o644); err != nil {
					return fail(err)
				}
			}
		}
		u.golden = dir
		fmt.Fprintf(c.stderr, "reference: every unit dense\n")
	}
	return u, cleanup, nil
}

func runBisect(c *cli, args []string) error {
	fs := newFlags(c, "bisect", bisectUsage)
	var f runFlags
	f.bind(fs)
	goldenDir := fs.String("golden", "", "golden directory")
	noPrefix := fs.Bool("no-prefix-cache", false, "recompute dense prefixes")
	var rf reportFlags
	fs.StringVar(&rf.json, "json", "", "verdict JSON")
	fs.StringVar(&rf.html, "html", "", "HTML report")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("bisect", "unexpected arguments %q", fs.Args())
	}
	u, cleanup, err := setupSearch(c, "bisect", &f, *goldenDir, *noPrefix)
	if err != nil {
		return err
	}
	defer cleanup()
	// With no --probe, search with the probes that fail when every unit is sparse.
	all := make([]int, len(u.units))
	for i := range all {
		all[i] = i
	}
	v, _, err := u.run(all)
	if err != nil {
		return err
	}
	if len(f.probes) == 0 {
		var failing []string
		for _, p := range v.Probes {
			if p.Outcome.Failing(false) && u.s.suite.Probe(p.Name) != nil {
				failing = append(failing, p.Name)
			}
		}
		if len(failing) > 0 {
			u.probes = failing
			delete(u.verdict, u.key(all))
		}
	}
	fmt.Fprintf(c.stdout, "bisect %s: %d sparse units, probes %s\n", f.candidate, len(u.units), strings.Join(u.probes, ", "))
	step := 0
	var stepErr error
	res := bisect.Search(len(u.units), func(set []int) (bisect.Outcome, string) {
		step++
		v, ok := u.verdict[u.key(set)] // the all-sparse run above, when its probes are these
		var err error
		if !ok {
			v, _, err = u.run(set)
		}
		if err != nil {
			stepErr = err
			fmt.Fprintf(c.stdout, "  step %2d: %2d sparse: unresolved: %v\n", step, len(set), err)
			return bisect.Unresolved, err.Error()
		}
		probe, m := headline(v)
		out := bisect.Pass
		if !v.Passed {
			out = bisect.Fail
		}
		for _, p := range v.Probes {
			if p.Outcome == golden.Error {
				out = bisect.Unresolved
			}
		}
		fmt.Fprintf(c.stdout, "  step %2d: sparse %-40s %-10s %s\n", step, u.names(set), out, describeMetric(probe, m))
		return out, describeMetric(probe, m)
	})
	switch res.Status {
	case bisect.Passes:
		fmt.Fprintf(c.stdout, "the candidate passes %s with every unit sparse; nothing to bisect\n", strings.Join(u.probes, ", "))
		return nil
	case bisect.NoCulprit:
		fmt.Fprintf(c.stdout, "the candidate fails even with every unit dense: the regression is not in the masks (check the base weights, the suite or the golden files)\n")
		return failError(fmt.Errorf("no culprit among the masks (%d probe runs)", res.Runs))
	case bisect.Undecided:
		return &exitError{code: exitInternal, err: fmt.Errorf("an endpoint run could not decide: %v", stepErr)}
	}
	// Each culprit alone: how much it moves the headline metric.
	fmt.Fprintf(c.stdout, "\nculprit")
	if res.Interaction {
		fmt.Fprintf(c.stdout, "s (an interaction: each alone passes, together they fail)")
	}
	fmt.Fprintf(c.stdout, ", found in %d probe runs (dense prefixes: %d reused, %d computed):\n", res.Runs, u.s.opts.Memo.Hits, u.s.opts.Memo.Misses)
	var sens []golden.Sensitivity
	for _, i := range res.Culprits {
		v, ok := u.verdict[u.key([]int{i})]
		if !ok {
			if v, _, err = u.run([]int{i}); err != nil {
				return err
			}
		}
		probe, m := headline(v)
		line := fmt.Sprintf("  %s mask alone: %s", u.units[i], describeMetric(probe, m))
		if m != nil && m.Golden != nil && *m.Golden != 0 {
			line = fmt.Sprintf("  %s mask alone %s %s %s by %.2g%% (%.5g → %.5g; tolerance %.2g%%: %s)", u.units[i], moveWord(m), probe, m.Metric,
				100*math.Abs(*m.Candidate-*m.Golden)/math.Abs(*m.Golden), *m.Golden, *m.Candidate, 100*m.Bound/math.Abs(*m.Golden), m.Outcome)
			sens = append(sens, golden.Sensitivity{Probe: probe, Metric: m.Metric, Layer: u.units[i].Layer, Component: string(u.units[i].Component),
				Mode: "only-sparse", Value: *m.Candidate, Delta: *m.Candidate - *m.Golden})
		}
		fmt.Fprintln(c.stdout, line)
	}
	if rf.json != "" || rf.html != "" {
		full := u.verdict[u.key(all)]
		if full == nil {
			if full, _, err = u.run(all); err != nil {
				return err
			}
		}
		full.Sensitivity = sens
		if err := rf.write(full); err != nil {
			return err
		}
	}
	return nil
}

func moveWord(m *golden.MetricVerdict) string {
	if *m.Candidate > *m.Golden {
		return "raises"
	}
	return "lowers"
}

func (u *unitSearch) names(set []int) string {
	if len(set) == len(u.units) {
		return "(all)"
	}
	if len(set) == 0 {
		return "(none)"
	}
	var s []string
	for _, i := range set {
		s = append(s, fmt.Sprintf("L%d.%s", u.units[i].Layer, u.units[i].Component))
	}
	return strings.Join(s, ",")
}

func runSweep(c *cli, args []string) error {
	fs := newFlags(c, "sweep", sweepUsage)
	var f runFlags
	f.bind(fs)
	onlyDense := fs.Bool("only-dense", false, "also each unit dense")
	noPrefix := fs.Bool("no-prefix-cache", false, "recompute dense prefixes")
	var rf reportFlags
	fs.StringVar(&rf.json, "json", "", "verdict JSON")
	fs.StringVar(&rf.html, "html", "", "HTML report")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("sweep", "unexpected arguments %q", fs.Args())
	}
	u, cleanup, err := setupSearch(c, "sweep", &f, "", *noPrefix)
	if err != nil {
		return err
	}
	defer cleanup()
	all := make([]int, len(u.units))
	for i := range all {
		all[i] = i
	}
	var sens []golden.Sensitivity
	fmt.Fprintf(c.stdout, "%-22s %-12s %-14s %-16s %12s %12s\n", "unit", "mode", "probe", "metric", "value", "vs dense")
	modes := []string{"only-sparse"}
	if *onlyDense {
		modes = append(modes, "only-dense")
	}
	for i, unit := range u.units {
		for _, mode := range modes {
			set := []int{i}
			if mode == "only-dense" {
				set = append(append([]int{}, all[:i]...), all[i+1:]...)
			}
			v, _, err := u.run(set)
			if err != nil {
				return err
			}
			for _, p := range v.Probes {
				for _, m := range p.Metrics {
					if !m.Gated || m.Candidate == nil || m.Golden == nil {
						continue
					}
					d := *m.Candidate - *m.Golden
					sens = append(sens, golden.Sensitivity{Probe: p.Name, Metric: m.Metric, Layer: unit.Layer, Component: string(unit.Component), Mode: mode, Value: *m.Candidate, Delta: d})
					fmt.Fprintf(c.stdout, "%-22s %-12s %-14s %-16s %12.5g %+12.4g\n", unit, mode, p.Name, m.Metric, *m.Candidate, d)
				}
			}
		}
	}
	if rf.json != "" || rf.html != "" {
		v, _, err := u.run(all)
		if err != nil {
			return err
		}
		v.Sensitivity = sens
		return rf.write(v)
	}
	return nil
}

package main

import (
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"sparsegate/golden"
	"sparsegate/harness/engine"
	"sparsegate/harness/progress"
	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

const runUsage = `usage: sparsegate run --suite SUITE [--candidate BUILD] [--base DIR] [flags]

Run a suite's probes on a dense base and/or a candidate build (a sparse
build directory with manifest.json, or a pruned or dense checkpoint) and
print a summary per probe. The metrics describe the candidate when one is
given, else the base. Drift, flips and speed probes need both builds;
without --base, a sparse candidate's own dense base is the base.

flags:
  --suite SUITE      suite file, or a built-in suite name (demo) (default demo)
  --candidate BUILD  candidate build directory
  --base DIR         dense base checkpoint (default: the candidate's base; for
                     the demo suite, the embedded demo model)
  --results FILE     write the Results JSON here
  --golden DIR       compare with the golden files in DIR and gate: exit 1
                     when a probe fails (the diff is printed)
  --allow-new        let probes without golden files (new) and golden files
                     without results (missing) pass
  --probe NAME       run only this probe (repeatable)
  --shard I/N        run only shard I of N (items split by a stable hash);
                     auto reads it from the environment: SPARSEGATE_SHARD_INDEX
                     and _COUNT (1-based), JOB_COMPLETION_INDEX (Kubernetes
                     Indexed Jobs, 0-based, count from --shard-count or
                     SPARSEGATE_SHARD_COUNT), CI_NODE_INDEX/CI_NODE_TOTAL,
                     CIRCLE_NODE_INDEX/CIRCLE_NODE_TOTAL,
                     BUILDKITE_PARALLEL_JOB/BUILDKITE_PARALLEL_JOB_COUNT
  --shard-count N    the shard count for --shard auto when the environment
                     gives only an index
  --cache DIR        cache of base results (default: the user cache directory)
  --no-cache         do not read or write the cache
  --threads N        kernel threads (default: all CPUs; results do not depend on it)
` + reportFlagsHelp + `
examples:
  sparsegate run --suite demo
  sparsegate run --suite gate.yaml --candidate ./builds/rc7 --golden golden/gate --junit junit.xml
  sparsegate run --suite gate.yaml --candidate ./builds/rc7 --base ./models/dense --results rc7.json
`

// runFlags are the flags shared by run, bisect and sweep.
type runFlags struct {
	suite, candidate, base, cache string
	probes                        []string
	shard                         string
	shardCount                    int
	noCache                       bool
	threads                       int
	getenv                        func(string) string
}

func (f *runFlags) bind(fs interface {
	StringVar(*string, string, string, string)
	StringArrayVar(*[]string, string, []string, string)
	BoolVar(*bool, string, bool, string)
	IntVar(*int, string, int, string)
}) {
	fs.StringVar(&f.suite, "suite", "demo", "suite file or built-in name")
	fs.StringVar(&f.candidate, "candidate", "", "candidate build")
	fs.StringVar(&f.base, "base", "", "dense base")
	fs.StringArrayVar(&f.probes, "probe", nil, "probe to run")
	fs.StringVar(&f.shard, "shard", "", "shard I/N or auto")
	fs.IntVar(&f.shardCount, "shard-count", 0, "shard count for --shard auto")
	fs.StringVar(&f.cache, "cache", "", "cache directory")
	fs.BoolVar(&f.noCache, "no-cache", false, "no cache")
	fs.IntVar(&f.threads, "threads", 0, "kernel threads")
}

// session is a loaded suite with its builds.
type session struct {
	suite      *suites.Suite
	base, cand *runner.Target
	opts       runner.Options
	cleanup    []func()
}

func (s *session) close() {
	for i := len(s.cleanup) - 1; i >= 0; i-- {
		s.cleanup[i]()
	}
}

func parseShard(cmd, s string) (results.Shard, error) {
	if s == "" {
		return results.Shard{Index: 1, Count: 1}, nil
	}
	a, b, ok := strings.Cut(s, "/")
	i, err1 := strconv.Atoi(a)
	n, err2 := strconv.Atoi(b)
	if !ok || err1 != nil || err2 != nil || n < 1 || i < 1 || i > n {
		return results.Shard{}, usageError(cmd, "--shard %q: use I/N with 1 ≤ I ≤ N, e.g. 2/4", s)
	}
	return results.Shard{Index: i, Count: n}, nil
}

// open loads the suite and the builds the flags name.
func (f *runFlags) open(c *cli, cmd string) (*session, error) {
	if f.threads < 0 {
		return nil, usageError(cmd, "--threads must not be negative")
	}
	if f.shardCount != 0 && f.shard != "auto" {
		return nil, usageError(cmd, "--shard-count goes with --shard auto")
	}
	shard, err := parseShard(cmd, f.shard)
	if f.shard == "auto" {
		getenv := f.getenv
		if getenv == nil {
			getenv = os.Getenv
		}
		shard, err = autoShard(cmd, getenv, f.shardCount)
	}
	if err != nil {
		return nil, err
	}
	s := &session{}
	ok := false
	defer func() {
		if !ok {
			s.close()
		}
	}()
	if s.suite, err = suites.Resolve(f.suite); err != nil {
		return nil, err
	}
	eo := engine.Options{Threads: f.threads}
	if f.candidate != "" {
		if s.cand, err = runner.Open(f.candidate, eo); err != nil {
			return nil, fmt.Errorf("candidate: %w", err)
		}
		s.cleanup = append(s.cleanup, func() { s.cand.Close() })
	}
	switch {
	case f.base != "":
		if s.base, err = runner.Open(f.base, eo); err != nil {
			return nil, fmt.Errorf("base: %w", err)
		}
		s.cleanup = append(s.cleanup, func() { s.base.Close() })
		if s.base.Build != nil {
			return nil, usageError(cmd, "--base %s is a sparse build; the base is a dense checkpoint", f.base)
		}
		if s.cand != nil && s.cand.Build != nil && s.cand.Info.WeightsHash != s.base.Info.WeightsHash {
			return nil, fmt.Errorf("the candidate %s is built on weights %s, but --base %s has weights %s; pass the base it was built from", f.candidate, s.cand.Info.WeightsHash, f.base, s.base.Info.WeightsHash)
		}
	case s.cand != nil && s.cand.Build != nil:
		s.base = runner.BaseOf(s.cand)
	case s.cand == nil && slices.Contains(suites.Builtin(), f.suite):
		root, cleanup, err := extractDemo()
		if err != nil {
			return nil, err
		}
		s.cleanup = append(s.cleanup, cleanup)
		if s.base, err = runner.Open(demoModelDir(root), eo); err != nil {
			return nil, err
		}
		s.base.Info.Path = "builtin:demo/model"
		s.cleanup = append(s.cleanup, func() { s.base.Close() })
	case s.cand == nil:
		return nil, usageError(cmd, "give --candidate BUILD, --base DIR or both")
	}
	s.opts = runner.Options{Shard: shard, Probes: f.probes, Memo: runner.NewMemo()}
	if !f.noCache {
		dir := f.cache
		if dir == "" {
			if ucd, err := os.UserCacheDir(); err == nil {
				dir = filepath.Join(ucd, "sparsegate", "base")
			}
		}
		s.opts.CacheDir = dir
	}
	s.opts.Log = c.stderr
	var meter *progress.Meter
	var current string
	s.opts.Progress = func(probe string, done, total int) {
		if probe != current {
			meter.Done()
			meter, current = progress.New(c.stderr, probe), probe
		}
		meter.Update(done, total)
		if done == total {
			meter.Done()
			meter, current = nil, ""
		}
	}
	ok = true
	return s, nil
}

func runRun(c *cli, args []string) error {
	fs := newFlags(c, "run", runUsage)
	var f runFlags
	f.bind(fs)
	resultsPath := fs.String("results", "", "results JSON")
	goldenDir := fs.String("golden", "", "golden directory")
	allowNew := fs.Bool("allow-new", false, "allow new and missing")
	var rf reportFlags
	rf.bind(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("run", "unexpected arguments %q", fs.Args())
	}
	if rf.any() && *goldenDir == "" {
		return usageError("run", "reports (--junit, --diff, --json, --markdown, --html) need --golden DIR to compare with")
	}
	s, err := f.open(c, "run")
	if err != nil {
		return err
	}
	defer s.close()
	r, err := runner.Run(s.suite, s.base, s.cand, s.opts)
	if err != nil {
		return err
	}
	if *resultsPath != "" {
		if err := r.Save(*resultsPath); err != nil {
			return fmt.Errorf("writing %s: %w", *resultsPath, err)
		}
	}
	if err := writeSummary(c.stdout, r); err != nil {
		return err
	}
	if *goldenDir != "" {
		v, err := golden.Compare(s.suite, r, *goldenDir, golden.Options{AllowNew: *allowNew})
		if err != nil {
			return err
		}
		return gateOutcome(c, v, &rf)
	}
	return probeErrors(r)
}

// probeErrors turns probes that could not run into an exit-2 error.
func probeErrors(r *results.Results) error {
	var errs []error
	for _, p := range r.Probes {
		if p.Status == results.Failed {
			errs = append(errs, fmt.Errorf("probe %q could not run: %s", p.Name, p.Note))
		}
	}
	return errors.Join(errs...)
}

// writeSummary prints one line per probe and its metrics.
func writeSummary(w io.Writer, r *results.Results) error {
	var b strings.Builder
	subject := "base " + r.Base.Path
	if r.Candidate != nil {
		subject = "candidate " + r.Candidate.Path
	}
	fmt.Fprintf(&b, "suite %s (%s), %s, shard %d/%d\n\n", r.Suite.Name, r.Suite.File, subject, r.Shard.Index, r.Shard.Count)
	fmt.Fprintf(&b, "%-14s %-11s %-8s %6s  %s\n", "probe", "kind", "status", "items", "metrics")
	for _, p := range r.Probes {
		var ms []string
		for _, m := range p.Metrics {
			v := strconv.FormatFloat(m.Value, 'g', 5, 64)
			if m.Nondeterministic {
				v += "~"
			}
			ms = append(ms, m.Name+"="+v)
		}
		if p.Status != results.Ran {
			ms = []string{p.Note}
		}
		fmt.Fprintf(&b, "%-14s %-11s %-8s %6d  %s\n", p.Name, p.Kind, p.Status, len(p.Items), strings.Join(ms, "  "))
	}
	b.WriteString("\n~ measured timing: varies from run to run\n")
	_, err := io.WriteString(w, b.String())
	return err
}

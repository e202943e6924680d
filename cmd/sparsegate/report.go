package main

import (
	"fmt"
	"strings"

	"sparsegate/golden"
	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

const reportUsage = `usage: sparsegate report --verdict FILE [--junit F] [--diff F] [--markdown F] [--html F] [--json F]

Re-render a saved verdict (from 'run --json') in any format, without
running a model.

flags:
  --verdict FILE     verdict JSON (required)
` + reportFlagsHelp + `
example:
  sparsegate report --verdict verdict.json --html report.html --markdown summary.md
`

func runReport(c *cli, args []string) error {
	fs := newFlags(c, "report", reportUsage)
	in := fs.String("verdict", "", "verdict JSON")
	var rf reportFlags
	rf.bind(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usageError("report", "unexpected arguments %q", fs.Args())
	case *in == "":
		return usageError("report", "--verdict FILE is required")
	case !rf.any():
		return usageError("report", "name at least one output: --junit, --diff, --json, --markdown or --html")
	}
	v, err := golden.LoadVerdict(*in)
	if err != nil {
		return err
	}
	return rf.write(v)
}

const compareUsage = `usage: sparsegate compare --suite S --results FILE --golden DIR [report flags]

Gate saved results (from 'run --results', or merged shards from 'merge')
against golden files without running a model: exit 0 passed, 1 failed.

flags:
  --suite SUITE      suite file or built-in name (default demo)
  --results FILE     results JSON (required)
  --golden DIR       golden directory (required)
  --allow-new        let new and missing golden values pass
` + reportFlagsHelp + `
example:
  sparsegate compare --suite gate.yaml --results merged.json --golden golden/gate --junit junit.xml
`

func runCompare(c *cli, args []string) error {
	fs := newFlags(c, "compare", compareUsage)
	suite := fs.String("suite", "demo", "suite")
	in := fs.String("results", "", "results JSON")
	dir := fs.String("golden", "", "golden directory")
	allowNew := fs.Bool("allow-new", false, "allow new and missing")
	var rf reportFlags
	rf.bind(fs)
	if err := parse(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usageError("compare", "unexpected arguments %q", fs.Args())
	case *in == "" || *dir == "":
		return usageError("compare", "--results FILE and --golden DIR are required")
	}
	s, err := suites.Resolve(*suite)
	if err != nil {
		return err
	}
	r, err := results.Load(*in)
	if err != nil {
		return err
	}
	v, err := golden.Compare(s, r, *dir, golden.Options{AllowNew: *allowNew})
	if err != nil {
		return err
	}
	return gateOutcome(c, v, &rf)
}

const mergeUsage = `usage: sparsegate merge --out FILE SHARD.json...

Merge the results of every shard of one run ('run --shard I/N --results
SHARD.json') into the results of the whole run: items in their unsharded
order and metrics recomputed from them, equal to an unsharded run's.

flags:
  --out FILE         the merged results JSON to write (required)

example:
  sparsegate merge --out merged.json shard-1.json shard-2.json shard-3.json
`

func runMerge(c *cli, args []string) error {
	fs := newFlags(c, "merge", mergeUsage)
	out := fs.String("out", "", "merged results")
	if err := parse(fs, args); err != nil {
		return err
	}
	if *out == "" || fs.NArg() == 0 {
		return usageError("merge", "give --out FILE and the shard results files")
	}
	var parts []*results.Results
	for _, p := range fs.Args() {
		r, err := results.Load(p)
		if err != nil {
			return err
		}
		parts = append(parts, r)
	}
	m, err := runner.Merge(parts)
	if err != nil {
		// Merge numbers the results in the order given; name the files.
		var named []string
		for i, p := range fs.Args() {
			named = append(named, fmt.Sprintf("%d = %s", i+1, p))
		}
		return fmt.Errorf("merge: %w (results %s); give the results of every shard of one run, each once", err, strings.Join(named, ", "))
	}
	if err := m.Save(*out); err != nil {
		return &exitError{code: exitInternal, err: err}
	}
	fmt.Fprintf(c.stdout, "merged %d shards into %s\n", len(parts), *out)
	return nil
}

package main

import (
	"fmt"
	"os"
	"strings"
	"time"

	"sparsegate/golden"
	"sparsegate/harness/results"
	"sparsegate/harness/runner"
	"sparsegate/suites"
)

const goldenUsage = `usage: sparsegate golden update|diff|verify [flags]

Golden files are the memory of what an approved build did: one text file per
probe in a golden directory per suite, plus an approval log (APPROVALS.log).

  golden update --suite S --golden DIR --from RESULTS_OR_BUILD --reason "..." [flags]
      Record the approved run's results as the new golden files. Shows the
      diff first, refuses without a reason, refuses when the golden files were
      recorded from another base or suite version unless --rebase, writes
      atomically and appends an entry to the approval log. --from is a results
      JSON file (from 'run --results') or a build directory (the suite is run
      on it first, with --base when given).
  golden diff --suite S --golden DIR --from RESULTS_OR_BUILD
      Show what an update would change, writing nothing.
  golden verify --golden DIR [--suite S]
      Check that every golden file parses, fingerprints agree, and every file
      is the one its latest approval recorded. Exit 1 on inconsistencies.

flags:
  --suite SUITE     suite file or built-in name (default demo)
  --golden DIR      golden directory (required)
  --from PATH       results JSON or build directory (update, diff)
  --base DIR        dense base, when --from is a build (see 'run')
  --probe NAME      only this probe (repeatable)
  --reason TEXT     why the change is approved (update; required)
  --who NAME        who approves (default: $SPARSEGATE_APPROVER, else $USER)
  --rebase          allow a new base or suite version (update)
  --dry-run         show the diff and the log entry, write nothing (update)
  --threads N       kernel threads when running a build

examples:
  sparsegate golden diff --suite demo --golden golden/demo --from rc7.json
  sparsegate golden update --suite demo --golden golden/demo --from rc7.json --reason "rc7 approved in review #42"
  sparsegate golden verify --golden golden/demo --suite demo
`

func runGolden(c *cli, args []string) error {
	if len(args) == 0 || strings.HasPrefix(args[0], "-") {
		if len(args) > 0 && (args[0] == "-h" || args[0] == "--help") {
			fmt.Fprint(c.stderr, goldenUsage)
			return nil
		}
		return usageError("golden", "name a subcommand: update, diff or verify")
	}
	sub := args[0]
	fs := newFlags(c, "golden "+sub, goldenUsage)
	var f runFlags
	f.bind(fs)
	dir := fs.String("golden", "", "golden directory")
	from := fs.String("from", "", "results or build")
	reason := fs.String("reason", "", "why")
	who := fs.String("who", "", "approver")
	rebase := fs.Bool("rebase", false, "allow rebase")
	dry := fs.Bool("dry-run", false, "write nothing")
	if err := parse(fs, args[1:]); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("golden", "unexpected arguments %q", fs.Args())
	}
	if *dir == "" {
		return usageError("golden", "--golden DIR is required")
	}
	switch sub {
	case "verify":
		var s *suites.Suite
		if fs.Changed("suite") {
			var err error
			if s, err = suites.Resolve(f.suite); err != nil {
				return err
			}
		}
		rep, err := golden.Verify(*dir, s)
		if err != nil {
			return err
		}
		fmt.Fprintf(c.stdout, "%s: %d golden files, %d approval entries\n", *dir, rep.Files, rep.Entries)
		for _, p := range rep.Problems {
			fmt.Fprintln(c.stdout, "  "+p)
		}
		if len(rep.Problems) > 0 {
			return failError(fmt.Errorf("%s: %d problems", *dir, len(rep.Problems)))
		}
		fmt.Fprintln(c.stdout, "ok")
		return nil
	case "update", "diff":
	default:
		return usageError("golden", "unknown subcommand %q; use update, diff or verify", sub)
	}
	if *from == "" {
		return usageError("golden", "--from RESULTS_OR_BUILD is required")
	}
	s, r, err := resultsFrom(c, &f, *from)
	if err != nil {
		return err
	}
	approver := *who
	if approver == "" {
		approver = os.Getenv("SPARSEGATE_APPROVER")
	}
	if approver == "" {
		approver = os.Getenv("USER")
	}
	why := *reason
	if sub == "diff" && why == "" {
		why = "(diff only)"
	}
	plan, err := golden.PlanUpdate(golden.UpdateOptions{Dir: *dir, Suite: s, Results: r, Probes: f.probes, Reason: why, Who: approver, Rebase: *rebase, Now: time.Now()})
	if err != nil {
		return err
	}
	changed := plan.Changed()
	if len(changed) == 0 {
		fmt.Fprintf(c.stdout, "%s: the golden files already hold these results; nothing to change\n", *dir)
		return nil
	}
	fmt.Fprint(c.stdout, plan.Diff(40))
	fmt.Fprintf(c.stdout, "\n%d of %d golden files change.\n", len(changed), len(plan.Files))
	if sub == "diff" {
		return nil
	}
	if *dry {
		fmt.Fprintf(c.stdout, "dry run: nothing written. To approve for real:\n  sparsegate golden update --suite %s --golden %s --from %s --reason %q\n", f.suite, *dir, *from, *reason)
		return nil
	}
	if err := plan.Apply(); err != nil {
		return err
	}
	fmt.Fprintf(c.stdout, "updated %s; approval by %s logged in %s\n", *dir, approver, golden.LogFile)
	return nil
}

// resultsFrom loads results from a file, or runs the suite on a build dir.
func resultsFrom(c *cli, f *runFlags, from string) (*suites.Suite, *results.Results, error) {
	st, err := os.Stat(from)
	if err != nil {
		return nil, nil, fmt.Errorf("--from: %w", err)
	}
	if !st.IsDir() {
		s, err := suites.Resolve(f.suite)
		if err != nil {
			return nil, nil, err
		}
		r, err := results.Load(from)
		if err != nil {
			return nil, nil, err
		}
		return s, r, nil
	}
	f.candidate = from
	sess, err := f.open(c, "golden")
	if err != nil {
		return nil, nil, err
	}
	defer sess.close()
	r, err := runner.Run(sess.suite, sess.base, sess.cand, sess.opts)
	if err != nil {
		return nil, nil, err
	}
	if err := probeErrors(r); err != nil {
		return nil, nil, err
	}
	return sess.suite, r, nil
}

package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/sparsity"
	"sparsegate/suites/demo"
)

const demoUsage = `usage: sparsegate demo [--workspace DIR] [--threads N]

The whole job on the embedded demo model, with every file written into the
workspace so each step can be re-run by hand:

  1. sparsify the dense demo model into the approved release (release-1);
  2. run the demo suite on it and record the golden files from it;
  3. sparsify a new candidate (release-2, another seed) and gate it: passes;
  4. break one layer's mask in a copy (release-2-broken) and gate it:
     fails, with the diff on stdout and JUnit, JSON, Markdown and HTML reports;
  5. bisect the broken candidate: it names the broken layer;
  6. show the golden update for the broken run as a dry run.

It prints the commands it ran. Exit code 0 when every step behaved as
expected (the failing gate is expected), 1 otherwise.

flags:
  --workspace DIR   where everything is written (default ./sparsegate-demo)
  --threads N       kernel threads (default: all CPUs)

example:
  sparsegate demo --workspace /tmp/sg-demo
`

// brokenLayer is the layer whose MLP budget the demo cuts.
const brokenLayer = 5

func runDemo(c *cli, args []string) error {
	fs := newFlags(c, "demo", demoUsage)
	ws := fs.String("workspace", "sparsegate-demo", "workspace directory")
	threads := fs.Int("threads", 0, "kernel threads")
	if err := parse(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usageError("demo", "unexpected arguments %q", fs.Args())
	}
	start := time.Now()
	if err := os.MkdirAll(*ws, 0o755); err != nil {
		return fmt.Errorf("making the workspace: %w", err)
	}
	fmt.Fprintf(c.stdout, "sparsegate demo: workspace %s\n", *ws)
	if _, err := demo.Extract(*ws); err != nil {
		return err
	}
	// Calibrate on held-out text the probes do not score (they read the
	// first 16 kB of it).
	held, err := os.ReadFile(filepath.Join(*ws, "data", "heldout.txt"))
	if err != nil {
		return err
	}
	calib := held[len(held)/2:]
	if i := bytes.IndexByte(calib, '\n'); i >= 0 {
		calib = calib[i+1:]
	}
	if err := atomicfile.WriteFile(filepath.Join(*ws, "data", "calibration.txt"), calib); err != nil {
		return err
	}
	p := func(parts ...string) string { return filepath.Join(append([]string{*ws}, parts...)...) }
	th := fmt.Sprint(*threads)
	common := []string{"--threads", th, "--cache", p("cache")}
	type step struct {
		title string
		args  []string
		want  int
		check func(out string) error
	}
	sparsify := func(out, seed string) []string {
		return []string{"sparsify", "--base", p("model"), "--text", p("data", "calibration.txt"), "--out", out,
			"--keep-mlp", "0.3", "--max-tokens", "3000", "--epochs", "8", "--seed", seed, "--threads", th}
	}
	broken := p("builds", "release-2-broken")
	steps := []step{
		{"make the approved release: sparsify the dense model (30% of MLP neurons per token)", sparsify(p("builds", "release-1"), "1"), 0, nil},
		{"run the demo suite on the approved release", append([]string{"run", "--suite", "demo", "--candidate", p("builds", "release-1"), "--results", p("results", "release-1.json")}, common...), 0, nil},
		{"record its golden files (an audited approval)", []string{"golden", "update", "--suite", "demo", "--golden", p("golden"), "--from", p("results", "release-1.json"),
			"--reason", "demo: release-1 approved as the baseline", "--who", "sparsegate-demo", "--rebase"}, 0, nil},
		{"make a new candidate: the same recipe with another seed", sparsify(p("builds", "release-2"), "2"), 0, nil},
		{"gate the new candidate against the golden files (expected to pass)", append([]string{"run", "--suite", "demo", "--candidate", p("builds", "release-2"), "--golden", p("golden"),
			"--junit", p("reports", "release-2.junit.xml")}, common...), 0, nil},
		{fmt.Sprintf("break one layer's mask: a copy of release-2 whose layer %d MLP keeps 8 neurons instead of 154", brokenLayer), nil, 0, nil},
		{"gate the broken candidate (expected to fail, with the diff)", append([]string{"run", "--suite", "demo", "--candidate", broken, "--golden", p("golden"), "--results", p("results", "release-2-broken.json"),
			"--junit", p("reports", "broken.junit.xml"), "--diff", p("reports", "broken.diff.txt"), "--json", p("reports", "broken.verdict.json"),
			"--markdown", p("reports", "broken.md"), "--html", p("reports", "broken.html")}, common...), 1, func(out string) error {
			if !strings.Contains(out, "FAIL") {
				return fmt.Errorf("the broken candidate's diff names no failing probe")
			}
			return nil
		}},
		{"bisect the broken candidate on held-out perplexity", append([]string{"bisect", "--suite", "demo", "--candidate", broken, "--golden", p("golden"), "--probe", "heldout-ppl",
			"--html", p("reports", "bisect.html"), "--json", p("reports", "bisect.verdict.json")}, common...), 0, func(out string) error {
			want := fmt.Sprintf("layer %d mlp mask alone", brokenLayer)
			if !strings.Contains(out, want) || strings.Count(out, " mask alone") != 1 {
				return fmt.Errorf("bisect did not name exactly layer %d's MLP", brokenLayer)
			}
			return nil
		}},
		{"show what approving the broken run would change (dry run)", []string{"golden", "update", "--suite", "demo", "--golden", p("golden"), "--from", p("results", "release-2-broken.json"),
			"--reason", "only if the regression is accepted", "--who", "sparsegate-demo", "--dry-run"}, 0, nil},
	}
	var ran []string
	ok := true
	for i, s := range steps {
		fmt.Fprintf(c.stdout, "\n== step %d: %s\n", i+1, s.title)
		if s.args == nil {
			if err := breakLayer(p("builds", "release-2"), broken, brokenLayer); err != nil {
				return err
			}
			fmt.Fprintf(c.stdout, "wrote %s\n", broken)
			ran = append(ran, fmt.Sprintf("cp -r %s %s  # then cut layer %d's mlp \"k\" to 8 in manifest.json", p("builds", "release-2"), broken, brokenLayer))
			continue
		}
		cmdline := "sparsegate " + quoteArgs(s.args)
		fmt.Fprintf(c.stdout, "$ %s\n", cmdline)
		ran = append(ran, cmdline)
		var out bytes.Buffer
		t0 := time.Now()
		code := run(s.args, io.MultiWriter(c.stdout, &out), c.stderr)
		fmt.Fprintf(c.stdout, "(exit %d, %.1fs)\n", code, time.Since(t0).Seconds())
		if code != s.want {
			ok = false
			fmt.Fprintf(c.stdout, "UNEXPECTED: step %d exited %d, expected %d\n", i+1, code, s.want)
			continue
		}
		if s.check != nil {
			if err := s.check(out.String()); err != nil {
				ok = false
				fmt.Fprintf(c.stdout, "UNEXPECTED: step %d: %v\n", i+1, err)
			}
		}
	}
	fmt.Fprintf(c.stdout, "\n== the commands, to repeat by hand:\n")
	for _, r := range ran {
		fmt.Fprintf(c.stdout, "  %s\n", r)
	}
	fmt.Fprintf(c.stdout, "\nreports: %s\n", p("reports"))
	fmt.Fprintf(c.stdout, "demo finished in %.0fs: %s\n", time.Since(start).Seconds(), map[bool]string{true: "every step behaved as expected", false: "some step did not behave as expected"}[ok])
	if !ok {
		return failError(fmt.Errorf("the demo did not behave as expected"))
	}
	return nil
}

// breakLayer copies a build and cuts one layer's MLP budget to 8 neurons.
func breakLayer(src, dst string, layer int) error {
	if err := os.RemoveAll(dst); err != nil {
		return err
	}
	if err := os.MkdirAll(dst, 0o755); err != nil {
		return err
	}
	entries, err := os.ReadDir(src)
	if err != nil {
		return err
	}
	for _, e := range entries {
		b, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			return err
		}
		if err := atomicfile.WriteFile(filepath.Join(dst, e.Name()), b); err != nil {
			return err
		}
	}
	m, err := sparsity.LoadManifest(dst)
	if err != nil {
		return err
	}
	m.Layers[layer].MLP.K = 8
	return m.Save(dst)
}

func quoteArgs(args []string) string {
	out := make([]string, len(args))
	for i, a := range args {
		if a == "" || strings.ContainsAny(a, " \t\"'$\\") {
			a = fmt.Sprintf("%q", a)
		}
		out[i] = a
	}
	return strings.Join(out, " ")
}

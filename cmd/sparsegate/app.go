package main

import (
	"errors"
	"fmt"
	"io"
	"runtime/debug"
	"strings"

	"github.com/spf13/pflag"
)

// Exit codes, as the design fixes them.
const (
	exitPass     = 0 // gate passed, or the command did its job
	exitFail     = 1 // gate failed
	exitBadInput = 2 // bad usage or bad input
	exitInternal = 3 // internal fault
)

// A command is one subcommand: its name, a one-line summary, its usage text
// and the function that runs it.
type command struct {
	name    string
	summary string
	usage   string
	run     func(c *cli, args []string) error
}

// cli carries the streams a command writes to, so tests run it in-process.
type cli struct {
	stdout, stderr io.Writer
}

// exitError carries an exit code with an error.
type exitError struct {
	code int
	err  error
}

func (e *exitError) Error() string { return e.err.Error() }
func (e *exitError) Unwrap() error { return e.err }

// usageError is bad usage: exit code 2, with a hint to the command's help.
func usageError(cmd, format string, args ...any) error {
	return &exitError{code: exitBadInput, err: fmt.Errorf("%s: %s (see 'sparsegate help %s')", cmd, fmt.Sprintf(format, args...), cmd)}
}

// failError is a failed gate or check: exit code 1.
func failError(err error) error { return &exitError{code: exitFail, err: err} }

func commands() []command {
	return []command{
		{"demo", "the whole job on the embedded demo model, step by step, in a workspace", demoUsage, runDemo},
		{"inspect", "describe a checkpoint: family, sizes, dtypes, shapes, tokenizer, weights hash", inspectUsage, runInspect},
		{"run", "run a suite on a base and/or a candidate build and summarise each probe", runUsage, runRun},
		{"bisect", "find which layer components' masks make a candidate fail", bisectUsage, runBisect},
		{"sweep", "per-unit sensitivity: each unit alone sparse (or alone dense)", sweepUsage, runSweep},
		{"compare", "gate saved results against golden files without running a model", compareUsage, runCompare},
		{"golden", "update, diff or verify golden files (audited, atomic)", goldenUsage, runGolden},
		{"merge", "merge the results of every shard of a run", mergeUsage, runMerge},
		{"report", "re-render a saved verdict as JUnit, diff, JSON, Markdown or HTML", reportUsage, runReport},
		{"score", "score a text file with a checkpoint: tokens, mean NLL, perplexity, bits per byte", scoreUsage, runScore},
		{"sparsify", "make a sparse build from a dense checkpoint: calibrate per-layer predictors", sparsifyUsage, runSparsify},
		{"synth", "write a random-weight checkpoint of a family (for smoke tests and benchmarks)", synthUsage, runSynth},
		{"version", "print the version", versionUsage, runVersion},
		{"help", "show help for a command", helpUsage, runHelp},
	}
}

func lookup(name string) *command {
	for _, c := range commands() {
		if c.name == name {
			return &c
		}
	}
	return nil
}

// run executes one command line and returns the exit code.
func run(args []string, stdout, stderr io.Writer) (code int) {
	c := &cli{stdout: stdout, stderr: stderr}
	defer func() {
		if r := recover(); r != nil {
			fmt.Fprintf(stderr, "sparsegate: internal fault: %v\n%s\nThis is a bug in sparsegate; please report it with the command line.\n", r, debug.Stack())
			code = exitInternal
		}
	}()
	if len(args) == 0 {
		writeOverview(stderr)
		return exitBadInput
	}
	name := args[0]
	if name == "-h" || name == "--help" {
		name = "help"
	}
	cmd := lookup(name)
	if cmd == nil {
		fmt.Fprintf(stderr, "sparsegate: unknown command %q\n\n", name)
		writeOverview(stderr)
		return exitBadInput
	}
	err := cmd.run(c, args[1:])
	if err == nil {
		return exitPass
	}
	if errors.Is(err, pflag.ErrHelp) {
		return exitPass
	}
	fmt.Fprintf(stderr, "sparsegate: %v\n", err)
	var ee *exitError
	if errors.As(err, &ee) {
		return ee.code
	}
	return exitBadInput // errors from loading and checking user files are bad input
}

func writeOverview(w io.Writer) {
	var b strings.Builder
	b.WriteString("sparsegate gates releases of sparsified language models on a CPU engine of its own.\n\nusage: sparsegate COMMAND [FLAGS]\n\ncommands:\n")
	for _, c := range commands() {
		fmt.Fprintf(&b, "  %-9s %s\n", c.name, c.summary)
	}
	b.WriteString("\nexit codes: 0 passed, 1 gate failed, 2 bad usage or input, 3 internal fault\n")
	b.WriteString("Run 'sparsegate help COMMAND' for a command's flags and an example.\n")
	io.WriteString(w, b.String())
}

const helpUsage = `usage: sparsegate help [COMMAND]

Without COMMAND, list the commands; with one, show its flags and examples.

flags: none

examples:
  sparsegate help
  sparsegate help run
`

func runHelp(c *cli, args []string) error {
	if len(args) == 1 && isHelpFlag(args[0]) {
		io.WriteString(c.stderr, helpUsage)
		return nil
	}
	if len(args) == 0 {
		writeOverview(c.stdout)
		return nil
	}
	if len(args) > 1 {
		return usageError("help", "takes at most one command name")
	}
	cmd := lookup(args[0])
	if cmd == nil {
		return usageError("help", "unknown command %q", args[0])
	}
	io.WriteString(c.stdout, cmd.usage)
	return nil
}

// isHelpFlag reports whether a lone argument asks for a command's help.
func isHelpFlag(arg string) bool { return arg == "-h" || arg == "--help" }

// newFlags makes a flag set for a command whose errors and help go to stderr.
func newFlags(c *cli, name, usage string) *pflag.FlagSet {
	fs := pflag.NewFlagSet(name, pflag.ContinueOnError)
	fs.SetOutput(c.stderr)
	fs.Usage = func() { io.WriteString(c.stderr, usage) }
	fs.SortFlags = false
	return fs
}

// parse parses flags, turning flag errors into usage errors.
func parse(fs *pflag.FlagSet, args []string) error {
	if err := fs.Parse(args); err != nil {
		if errors.Is(err, pflag.ErrHelp) {
			return err
		}
		return usageError(fs.Name(), "%v", err)
	}
	return nil
}

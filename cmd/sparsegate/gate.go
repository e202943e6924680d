package main

import (
	"fmt"
	"io"
	"os"

	"sparsegate/golden"
	"sparsegate/reporters"
)

// reportFlags are the report outputs shared by run, compare and report.
type reportFlags struct {
	junit, diff, json, markdown, html string
}

const reportFlagsHelp = `  --junit FILE       write JUnit XML (one testsuite per probe)
  --diff FILE        write the textual diff of what degraded or improved
  --json FILE        write the whole verdict as JSON (re-render it with 'report')
  --markdown FILE    write a Markdown summary for a pull-request comment
  --html FILE        write a self-contained HTML report with charts
`

func (f *reportFlags) bind(fs interface {
	StringVar(*string, string, string, string)
}) {
	fs.StringVar(&f.junit, "junit", "", "JUnit XML file")
	fs.StringVar(&f.diff, "diff", "", "textual diff file")
	fs.StringVar(&f.json, "json", "", "verdict JSON file")
	fs.StringVar(&f.markdown, "markdown", "", "Markdown file")
	fs.StringVar(&f.html, "html", "", "HTML file")
}

func (f *reportFlags) any() bool {
	return f.junit != "" || f.diff != "" || f.json != "" || f.markdown != "" || f.html != ""
}

// write renders every requested report.
func (f *reportFlags) write(v *golden.Verdict) error {
	for _, o := range []struct {
		path string
		r    reporters.Reporter
	}{{f.junit, reporters.JUnit{}}, {f.diff, reporters.Diff{}}, {f.json, reporters.JSON{}}, {f.markdown, reporters.Markdown{}}, {f.html, reporters.HTML{}}} {
		if o.path == "" {
			continue
		}
		if err := reporters.WriteFile(o.path, o.r, v); err != nil {
			return &exitError{code: exitBadInput, err: err}
		}
	}
	return nil
}

// gateOutcome writes the reports, prints the verdict line (and the diff on
// stdout when the gate fails) and returns the gate's exit error.
func gateOutcome(c *cli, v *golden.Verdict, rf *reportFlags) error {
	if err := rf.write(v); err != nil {
		return err
	}
	counts := map[golden.Outcome]int{}
	for _, p := range v.Probes {
		counts[p.Outcome]++
	}
	fmt.Fprintf(c.stdout, "\ngate: %s (", map[bool]string{true: "PASSED", false: "FAILED"}[v.Passed])
	sep := ""
	for _, o := range []golden.Outcome{golden.Pass, golden.Improved, golden.Skipped, golden.New, golden.Missing, golden.Fail, golden.Error} {
		if counts[o] > 0 {
			fmt.Fprintf(c.stdout, "%s%d %s", sep, counts[o], o)
			sep = ", "
		}
	}
	fmt.Fprintf(c.stdout, ") against %s\n", v.GoldenDir)
	if !v.Passed {
		d := reporters.Diff{Color: colorOut(c.stdout)}
		io.WriteString(c.stdout, "\n")
		if err := d.Report(c.stdout, v); err != nil {
			return err
		}
		return failError(fmt.Errorf("the gate failed against %s", v.GoldenDir))
	}
	io.WriteString(c.stdout, reporters.Caution+"\n")
	return nil
}

func colorOut(w io.Writer) bool {
	f, ok := w.(*os.File)
	return ok && reporters.ColorFor(f, os.Getenv)
}

package reporters

import (
	"bufio"
	"fmt"
	"io"
	"math"

	"sparsegate/golden"
)

// JUnit writes the verdict as JUnit XML for CI: one <testsuite> per probe,
// one <testcase> per gated metric. A failing metric is a <failure> whose
// message gives the numbers and whose body is the probe's block of the Diff
// report (without colour); an improved metric passes with a <system-out>
// note. A probe that could not run is one "run" test case with an <error>,
// a skipped probe one "run" test case with <skipped>. Each test suite carries
// the fingerprint and shard as <properties>.
type JUnit struct {
	// MaxBody bounds each failure or error body in bytes (64 KiB when 0);
	// a longer body is cut and ends with "… truncated N bytes".
	MaxBody int
}

// A junitCase is one <testcase> before it is written.
type junitCase struct {
	name string
	// status is "", "failure", "error" or "skipped".
	status  string
	message string
	typ     string
	// body says whether the element holds the probe's diff block.
	body   bool
	stdout string
}

// junitCounts are the counts a <testsuite> or <testsuites> element carries.
type junitCounts struct {
	tests, failures, errors, skipped int
	// millis is the time in milliseconds.
	millis int64
}

func (c *junitCounts) add(o junitCounts) {
	c.tests += o.tests
	c.failures += o.failures
	c.errors += o.errors
	c.skipped += o.skipped
	c.millis += o.millis
}

// attrs formats the counts as XML attributes.
func (c junitCounts) attrs() string {
	return fmt.Sprintf(`tests="%d" failures="%d" errors="%d" skipped="%d" time="%s"`,
		c.tests, c.failures, c.errors, c.skipped, seconds(c.millis))
}

// seconds formats milliseconds as seconds with three decimals.
func seconds(ms int64) string {
	return fmt.Sprintf("%d.%03d", ms/1000, ms%1000)
}

// millis converts a probe's run time to whole milliseconds (0 when negative
// or not a number), so that test case times add up exactly.
func millis(s float64) int64 {
	if !(s > 0) || s > 1e12 {
		return 0
	}
	return int64(math.Round(s * 1000))
}

// Report writes v as JUnit XML.
func (j JUnit) Report(w io.Writer, v *golden.Verdict) error {
	maxBody := j.MaxBody
	if maxBody <= 0 {
		maxBody = 64 << 10
	}
	var total junitCounts
	for _, p := range v.Probes {
		total.add(countCases(junitCases(v, p), p))
	}
	bw := bufio.NewWriter(w)
	bw.WriteString(`<?xml version="1.0" encoding="UTF-8"?>` + "\n")
	fmt.Fprintf(bw, "<testsuites name=\"%s\" %s>\n", xmlEscape(v.Suite.Name, true), total.attrs())
	for _, p := range v.Probes {
		j.writeSuite(bw, v, p, maxBody)
	}
	bw.WriteString("</testsuites>\n")
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("junit report: %w", err)
	}
	return nil
}

// countCases returns the counts of a probe's test cases.
func countCases(cases []junitCase, p *golden.ProbeVerdict) junitCounts {
	c := junitCounts{tests: len(cases), millis: millis(p.Seconds)}
	for _, tc := range cases {
		switch tc.status {
		case "failure":
			c.failures++
		case "error":
			c.errors++
		case "skipped":
			c.skipped++
		}
	}
	return c
}

// junitCases decides the test cases of probe p.
func junitCases(v *golden.Verdict, p *golden.ProbeVerdict) []junitCase {
	switch p.Outcome {
	case golden.Error:
		msg := p.Note
		if msg == "" {
			msg = "probe could not run"
		}
		return []junitCase{{name: "run", status: "error", message: msg, typ: "error", body: true}}
	case golden.Skipped:
		msg := p.Note
		if msg == "" {
			msg = "skipped"
		}
		return []junitCase{{name: "run", status: "skipped", message: msg}}
	}
	var cases []junitCase
	failed := false
	for _, m := range p.Metrics {
		if !m.Gated {
			continue
		}
		tc := junitCase{name: m.Metric}
		switch {
		case m.Outcome == golden.Error:
			tc.status, tc.message, tc.typ, tc.body = "error", metricSummary(m), "error", true
		case m.Outcome == golden.Skipped:
			tc.status, tc.message = "skipped", "metric "+m.Metric+" skipped"
		case m.Outcome.Failing(v.AllowNew):
			tc.status, tc.message, tc.typ, tc.body = "failure", metricSummary(m), "regression", true
		case m.Outcome == golden.Improved:
			tc.stdout = "improved: " + metricSummary(m)
		case m.Outcome == golden.New || m.Outcome == golden.Missing:
			tc.stdout = string(m.Outcome) + " (allowed): " + metricSummary(m)
		}
		if tc.status == "failure" || tc.status == "error" {
			failed = true
		}
		cases = append(cases, tc)
	}
	// A probe that fails the gate must fail in CI even when no gated metric
	// says why (a fingerprint change, a missing golden file).
	if p.Outcome.Failing(v.AllowNew) && !failed {
		msg := fmt.Sprintf("probe %s: %s", p.Name, p.Outcome)
		if p.Note != "" {
			msg += ": " + p.Note
		}
		cases = append(cases, junitCase{name: "probe", status: "failure", message: msg, typ: "regression", body: true})
	}
	return cases
}

// writeSuite writes the <testsuite> of probe p.
func (j JUnit) writeSuite(w *bufio.Writer, v *golden.Verdict, p *golden.ProbeVerdict, maxBody int) {
	cases := junitCases(v, p)
	counts := countCases(cases, p)
	fmt.Fprintf(w, "  <testsuite name=\"%s\" %s>\n", xmlEscape(p.Name, true), counts.attrs())
	w.WriteString("    <properties>\n")
	fp := v.Fingerprint
	props := [][2]string{
		{"base_weights", fp.BaseWeights},
		{"candidate_weights", fp.CandidateWeights},
		{"manifest", fp.Manifest},
		{"suite", fp.Suite},
		{"probe", fp.Probe},
		{"tokenizer", fp.Tokenizer},
		{"harness", fp.Harness},
		{"shard", fmt.Sprintf("%d/%d", v.Shard.Index, v.Shard.Count)},
	}
	for _, kv := range props {
		fmt.Fprintf(w, "      <property name=\"%s\" value=\"%s\"/>\n", kv[0], xmlEscape(kv[1], true))
	}
	w.WriteString("    </properties>\n")
	classname := xmlEscape(v.Suite.Name+"."+p.Name, true)
	var body string
	for i, tc := range cases {
		ms := int64(0)
		if n := int64(len(cases)); n > 0 {
			ms = counts.millis / n
			if int64(i) < counts.millis%n {
				ms++
			}
		}
		fmt.Fprintf(w, "    <testcase classname=\"%s\" name=\"%s\" time=\"%s\"", classname, xmlEscape(tc.name, true), seconds(ms))
		if tc.status == "" && tc.stdout == "" {
			w.WriteString("/>\n")
			continue
		}
		w.WriteString(">\n")
		switch tc.status {
		case "skipped":
			fmt.Fprintf(w, "      <skipped message=\"%s\"/>\n", xmlEscape(tc.message, true))
		case "failure", "error":
			fmt.Fprintf(w, "      <%s message=\"%s\" type=\"%s\">", tc.status, xmlEscape(tc.message, true), tc.typ)
			if tc.body {
				if body == "" {
					body = probeBody(p, v.AllowNew, maxBody)
				}
				w.WriteString(xmlEscape(body, false))
			}
			fmt.Fprintf(w, "</%s>\n", tc.status)
		}
		if tc.stdout != "" {
			fmt.Fprintf(w, "      <system-out>%s</system-out>\n", xmlEscape(tc.stdout, false))
		}
		w.WriteString("    </testcase>\n")
	}
	w.WriteString("  </testsuite>\n")
}

// probeBody returns the Diff block of p without colour, bounded to maxBody
// bytes.
func probeBody(p *golden.ProbeVerdict, allowNew bool, maxBody int) string {
	c := &capBuffer{max: maxBody}
	Diff{}.writeBlock(c, p, allowNew)
	return c.bounded(maxBody)
}

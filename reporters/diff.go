package reporters

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"sparsegate/golden"
)

// Diff writes, for the engineer, exactly what changed against golden: one
// block per probe whose outcome is fail, improved, error, new or missing, in
// verdict order, with its metrics (golden → candidate, delta, bound, p-value)
// and its per-item changes (lost and gained items with their choices and
// margins, generated text as a line diff, perplexity window NLL moves).
// Passing and skipped probes write nothing; when no probe has a block, Diff
// writes one line saying so.
type Diff struct {
	// Color adds ANSI colour: red for worse, green for better (see ColorFor).
	Color bool
	// MaxItems bounds the item changes shown per probe (50 when 0); the
	// rest are counted in a "… and N more" line.
	MaxItems int
}

// ANSI colour sequences (ECMA-48 SGR parameters 1 bold, 31 red, 32 green,
// 0 reset; from memory).
const (
	ansiRed   = "\x1b[31m"
	ansiGreen = "\x1b[32m"
	ansiBold  = "\x1b[1m"
	ansiReset = "\x1b[0m"
)

// Report writes the diff of v.
func (d Diff) Report(w io.Writer, v *golden.Verdict) error {
	bw := bufio.NewWriter(w)
	blocks := 0
	for _, p := range v.Probes {
		if !hasBlock(p) {
			continue
		}
		if blocks > 0 {
			bw.WriteString("\n")
		}
		blocks++
		d.writeBlock(bw, p, v.AllowNew)
	}
	if blocks == 0 {
		fmt.Fprintf(bw, "no differences from golden: %d probes, suite %s outcome %s\n",
			len(v.Probes), oneLine(v.Suite.Name), oneLine(string(v.Outcome)))
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("diff report: %w", err)
	}
	return nil
}

// hasBlock reports whether probe p gets a block in the diff.
func hasBlock(p *golden.ProbeVerdict) bool {
	switch p.Outcome {
	case golden.Fail, golden.Improved, golden.Error, golden.New, golden.Missing:
		return true
	}
	return false
}

// paint wraps s in an ANSI colour when colour is on and c is not empty.
func (d Diff) paint(c, s string) string {
	if !d.Color || c == "" {
		return s
	}
	return c + s + ansiReset
}

// outcomeColor is the colour of an outcome: red when it fails the gate,
// green for an improvement.
func outcomeColor(o golden.Outcome, allowNew bool) string {
	switch {
	case o.Failing(allowNew):
		return ansiRed
	case o == golden.Improved:
		return ansiGreen
	}
	return ""
}

// writeBlock writes probe p's block: header, metric lines, item changes.
// Text from the verdict is passed through visible first, so the block holds
// no control characters but tab and newline (and the ANSI sequences of
// Color).
func (d Diff) writeBlock(w io.StringWriter, p *golden.ProbeVerdict, allowNew bool) {
	header := fmt.Sprintf("--- probe %s (%s): %s", oneLine(p.Name), oneLine(p.Kind), outcomeWord(p.Outcome))
	if d.Color {
		header = ansiBold + d.paint(outcomeColor(p.Outcome, allowNew), header)
		if outcomeColor(p.Outcome, allowNew) == "" {
			header += ansiReset
		}
	}
	w.WriteString(header + "\n")
	if p.Note != "" {
		w.WriteString("  note: " + oneLine(p.Note) + "\n")
	}
	for _, m := range p.Metrics {
		w.WriteString(d.paint(outcomeColor(m.Outcome, allowNew || !m.Gated), "  "+metricLine(m)) + "\n")
		if m.Note != "" {
			w.WriteString("      note: " + oneLine(m.Note) + "\n")
		}
		if m.PowerWarning != "" {
			w.WriteString("      power: " + oneLine(m.PowerWarning) + "\n")
		}
	}
	d.writeChanges(w, p)
}

// metricLine describes one metric on one line, without indentation.
func metricLine(m *golden.MetricVerdict) string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s: %s → %s (", oneLine(m.Metric), opt(m.Golden), opt(m.Candidate))
	fmt.Fprintf(&b, "delta %s, bound %s", optSigned(m.Delta), num(m.Bound))
	if m.P != nil {
		fmt.Fprintf(&b, ", p %s", num(*m.P))
	}
	if m.CILo != nil && m.CIHi != nil {
		fmt.Fprintf(&b, ", ci [%s, %s]", num(*m.CILo), num(*m.CIHi))
	}
	b.WriteString("): " + oneLine(string(m.Outcome)))
	if m.Lost > 0 || m.Gained > 0 {
		fmt.Fprintf(&b, "; %d lost, %d gained", m.Lost, m.Gained)
	}
	if !m.Gated {
		b.WriteString(" (not gated)")
	}
	if m.Nondeterministic {
		b.WriteString(" (measured timing, not reproducible)")
	}
	return b.String()
}

// writeChanges writes the item changes of p, at most MaxItems of them.
func (d Diff) writeChanges(w io.StringWriter, p *golden.ProbeVerdict) {
	if len(p.Changes) == 0 {
		return
	}
	limit := d.MaxItems
	if limit <= 0 {
		limit = 50
	}
	w.WriteString(fmt.Sprintf("  items changed: %d of %d\n", len(p.Changes), p.Items))
	for i := range p.Changes {
		if i == limit {
			w.WriteString(fmt.Sprintf("  … and %d more\n", len(p.Changes)-limit))
			break
		}
		d.writeChange(w, &p.Changes[i])
	}
}

// writeChange writes one item change: a line with the item and its numbers,
// then the text diff when the item has texts that differ.
func (d Diff) writeChange(w io.StringWriter, c *golden.ItemChange) {
	var b strings.Builder
	fmt.Fprintf(&b, "    %s %s #%d", oneLine(c.Change), oneLine(c.ID), c.Index)
	var parts []string
	if c.GoldenChosen != nil || c.CandidateChosen != nil {
		parts = append(parts, fmt.Sprintf("chosen %s → %s", optInt(c.GoldenChosen), optInt(c.CandidateChosen)))
	}
	if c.GoldenMargin != nil || c.CandidateMargin != nil {
		parts = append(parts, fmt.Sprintf("margin %s → %s", opt(c.GoldenMargin), opt(c.CandidateMargin)))
	}
	if c.GoldenNLL != nil || c.CandidateNLL != nil {
		s := fmt.Sprintf("nll %s → %s", opt(c.GoldenNLL), opt(c.CandidateNLL))
		if c.GoldenNLL != nil && c.CandidateNLL != nil {
			s += " (" + signed(*c.CandidateNLL-*c.GoldenNLL) + ")"
		}
		parts = append(parts, s)
	}
	switch c.Change {
	case golden.Added:
		parts = append(parts, "no golden record")
	case golden.Dropped:
		parts = append(parts, "golden record without a result")
	}
	if len(parts) > 0 {
		b.WriteString(": " + strings.Join(parts, ", "))
	}
	color := ""
	switch c.Change {
	case golden.Lost, golden.Dropped:
		color = ansiRed
	case golden.Gained:
		color = ansiGreen
	}
	w.WriteString(d.paint(color, b.String()) + "\n")
	if c.GoldenText == nil && c.CandidateText == nil {
		return
	}
	g, cand := "", ""
	if c.GoldenText != nil {
		g = *c.GoldenText
	}
	if c.CandidateText != nil {
		cand = *c.CandidateText
	}
	if g == cand {
		w.WriteString("      (text unchanged)\n")
		return
	}
	// Red and green for removed and added lines: common practice for
	// unified diffs, no source.
	for _, l := range textDiff(visible(g), visible(cand)) {
		line := "      " + string(l.op) + " " + l.text
		switch l.op {
		case '-':
			line = d.paint(ansiRed, line)
		case '+':
			line = d.paint(ansiGreen, line)
		}
		w.WriteString(line + "\n")
	}
}

// optInt formats an optional choice, "none" when absent.
func optInt(x *int) string {
	if x == nil {
		return "none"
	}
	return fmt.Sprint(*x)
}

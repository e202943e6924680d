package reporters

import (
	"bufio"
	"fmt"
	"io"
	"strings"

	"sparsegate/golden"
)

// Markdown writes a summary fit for a pull-request comment: a title with the
// overall outcome, a table with one row per probe, the failing metrics with
// their numbers, the power warnings and the caution line. It has no links,
// and its size stays under MarkdownLimit bytes whatever the suite's size:
// rows and list entries that do not fit are counted in "… N more" lines.
type Markdown struct{}

// MarkdownLimit is the size the Markdown report never reaches, in bytes:
// common comment size limits of code-review sites are around 64 KiB (common
// practice, no source).
const MarkdownLimit = 64 << 10

// Caution is the line every human-facing report ends with.
const Caution = "A passing gate is evidence, not proof; the release decision stays with the people accountable for it."

// Byte budgets of the Markdown report's parts, and the runes one piece of
// text may keep. Every piece of verdict text is clipped, so one line is at
// most a few KiB, and the header, the "more" lines and the footer stay well
// inside the 8 KiB the budgets leave of MarkdownLimit.
const (
	mdTableBudget    = 32 << 10
	mdFailingBudget  = 16 << 10
	mdWarningsBudget = 8 << 10
	mdCellMax        = 80 // runes per table cell
	mdTextMax        = 300
)

// Report writes the Markdown summary of v.
func (Markdown) Report(w io.Writer, v *golden.Verdict) error {
	bw := bufio.NewWriter(w)
	verdict := "FAIL"
	if v.Passed {
		verdict = "PASS"
	}
	fmt.Fprintf(bw, "## sparsegate: %s, suite %s (%s)\n\n", verdict, mdText(v.Suite.Name, mdCellMax), mdText(string(v.Outcome), 20))
	bw.WriteString(mdText(countLine(v), mdTextMax) + "\n\n")
	if v.AllowNew {
		bw.WriteString("New and missing golden values are allowed in this run.\n\n")
	}

	bw.WriteString("| probe | kind | outcome | metric | golden → candidate | delta |\n")
	bw.WriteString("| --- | --- | --- | --- | --- | --- |\n")
	used := 0
	for i, p := range v.Probes {
		row := mdRow(p)
		if used+len(row) > mdTableBudget {
			fmt.Fprintf(bw, "\n… %d more probes\n", len(v.Probes)-i)
			break
		}
		used += len(row)
		bw.WriteString(row)
	}

	var failing []string
	for _, p := range v.Probes {
		if p.Outcome == golden.Error || (p.Outcome.Failing(v.AllowNew) && !anyFailing(p, v.AllowNew)) {
			line := fmt.Sprintf("- %s: %s", mdText(p.Name, mdCellMax), mdText(string(p.Outcome), 20))
			if p.Note != "" {
				line += ": " + mdText(p.Note, mdTextMax)
			}
			failing = append(failing, line+"\n")
		}
		for _, m := range p.Metrics {
			if failingMetric(m, v.AllowNew) {
				failing = append(failing, fmt.Sprintf("- %s: %s\n", mdText(p.Name, mdCellMax), mdText(metricSummary(m), mdTextMax)))
			}
		}
	}
	writeList(bw, "Failing", failing, mdFailingBudget, "failing entries")

	var warnings []string
	for _, p := range v.Probes {
		for _, m := range p.Metrics {
			if m.PowerWarning != "" {
				warnings = append(warnings, fmt.Sprintf("- %s / %s: %s\n", mdText(p.Name, mdCellMax), mdText(m.Metric, mdCellMax), mdText(m.PowerWarning, mdTextMax)))
			}
		}
	}
	writeList(bw, "Power warnings", warnings, mdWarningsBudget, "power warnings")

	bw.WriteString("\n" + Caution + "\n")
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("markdown report: %w", err)
	}
	return nil
}

// writeList writes a titled list of lines, as many as budget bytes allow.
func writeList(w *bufio.Writer, title string, lines []string, budget int, what string) {
	if len(lines) == 0 {
		return
	}
	fmt.Fprintf(w, "\n### %s\n\n", title)
	used := 0
	for i, l := range lines {
		if used+len(l) > budget {
			fmt.Fprintf(w, "- … %d more %s\n", len(lines)-i, what)
			return
		}
		used += len(l)
		w.WriteString(l)
	}
}

// anyFailing reports whether a gated metric of p fails the gate.
func anyFailing(p *golden.ProbeVerdict, allowNew bool) bool {
	for _, m := range p.Metrics {
		if failingMetric(m, allowNew) {
			return true
		}
	}
	return false
}

// countLine says how many probes had each outcome, worst first.
func countLine(v *golden.Verdict) string {
	order := []golden.Outcome{golden.Error, golden.Fail, golden.Missing, golden.New, golden.Skipped, golden.Improved, golden.Pass}
	counts := make([]int, len(order))
	other := 0
	for _, p := range v.Probes {
		found := false
		for i, o := range order {
			if p.Outcome == o {
				counts[i]++
				found = true
			}
		}
		if !found {
			other++
		}
	}
	parts := []string{fmt.Sprintf("%d probes", len(v.Probes))}
	for i, o := range order {
		if counts[i] > 0 {
			parts = append(parts, fmt.Sprintf("%d %s", counts[i], o))
		}
	}
	if other > 0 {
		parts = append(parts, fmt.Sprintf("%d other", other))
	}
	return strings.Join(parts, ", ") + "."
}

// mdRow is the table row of probe p.
func mdRow(p *golden.ProbeVerdict) string {
	metric, values, delta := "", "", ""
	if m := keyMetric(p); m != nil {
		metric = m.Metric
		if m.Nondeterministic {
			metric += " (timing)"
		}
		values = opt(m.Golden) + " → " + opt(m.Candidate)
		delta = optSigned(m.Delta)
	}
	return "| " + strings.Join([]string{
		mdText(p.Name, mdCellMax), mdText(p.Kind, mdCellMax), mdText(string(p.Outcome), 20),
		mdText(metric, mdCellMax), values, delta,
	}, " | ") + " |\n"
}

// mdText makes s safe as inline Markdown in the middle of a line: control
// characters made visible, clipped to max runes, the characters of inline
// markup (emphasis, code, links, images, HTML, entities, table cells)
// escaped with a backslash, and "://" written as ":\/\/" so that no address
// becomes a link. The comment then shows the text as written.
func mdText(s string, max int) string {
	s = clip(oneLine(s), max)
	var b strings.Builder
	for _, r := range s {
		if strings.ContainsRune("\\`*_[]<>|~&", r) {
			b.WriteByte('\\')
		}
		b.WriteRune(r)
	}
	return strings.ReplaceAll(b.String(), "://", `:\/\/`)
}

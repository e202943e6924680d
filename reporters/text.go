package reporters

import (
	"fmt"
	"strconv"
	"strings"
	"unicode/utf8"

	"sparsegate/golden"
)

// visible returns s with everything that could disturb a terminal or a file
// format made visible: invalid UTF-8 bytes become \xNN, C0 controls other than
// tab and newline, DEL and C1 controls become \xNN or \uNNNN, as do U+FFFE and
// U+FFFF (not characters in XML 1.0). Other text, backslashes included, is
// kept as it is, so a literal "\x01" in the input reads the same as an escaped
// control character.
func visible(s string) string {
	clean := true
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		if needsEscape(r, n) {
			clean = false
			break
		}
		i += n
	}
	if clean {
		return s
	}
	var b strings.Builder
	b.Grow(len(s) + 8)
	for i := 0; i < len(s); {
		r, n := utf8.DecodeRuneInString(s[i:])
		switch {
		case r == utf8.RuneError && n == 1:
			fmt.Fprintf(&b, `\x%02x`, s[i])
		case needsEscape(r, n) && r < 0x100:
			fmt.Fprintf(&b, `\x%02x`, r)
		case needsEscape(r, n):
			fmt.Fprintf(&b, `\u%04x`, r)
		default:
			b.WriteString(s[i : i+n])
		}
		i += n
	}
	return b.String()
}

// needsEscape reports whether rune r, decoded from n bytes, is one visible
// replaces.
func needsEscape(r rune, n int) bool {
	switch {
	case r == utf8.RuneError && n == 1:
		return true
	case r == '\t' || r == '\n':
		return false
	case r < 0x20, r == 0x7f, r >= 0x80 && r <= 0x9f:
		return true
	case r == 0xfffe || r == 0xffff:
		return true
	}
	return false
}

// oneLine is visible(s) with newlines shown as \n, for text that must stay
// on one line.
func oneLine(s string) string {
	return strings.ReplaceAll(visible(s), "\n", `\n`)
}

// clip shortens s to at most max runes, ending it with "…" when cut.
func clip(s string, max int) string {
	if utf8.RuneCountInString(s) <= max {
		return s
	}
	n := 0
	for i := range s {
		if n == max-1 {
			return s[:i] + "…"
		}
		n++
	}
	return s
}

// num formats a value with six significant digits, the precision every
// report uses.
func num(x float64) string {
	return strconv.FormatFloat(x, 'g', 6, 64)
}

// signed formats a difference with an explicit sign.
func signed(x float64) string {
	if x >= 0 {
		return "+" + num(x)
	}
	return num(x)
}

// opt formats an optional value, "none" when absent.
func opt(x *float64) string {
	if x == nil {
		return "none"
	}
	return num(*x)
}

// optSigned formats an optional difference, "none" when absent.
func optSigned(x *float64) string {
	if x == nil {
		return "none"
	}
	return signed(*x)
}

// worsening returns how much worse the candidate is than golden (negative
// when better) and whether both values are present.
func worsening(m *golden.MetricVerdict) (float64, bool) {
	if m.Golden == nil || m.Candidate == nil {
		return 0, false
	}
	d := *m.Candidate - *m.Golden
	if m.Delta != nil {
		d = *m.Delta
	}
	if m.Better == "higher" {
		return -d, true
	}
	return d, true
}

// metricSummary is the one-line description of a metric's comparison that
// JUnit messages, Markdown and HTML share:
// "metric M: golden G, candidate C, delta D, tolerance T, p P".
func metricSummary(m *golden.MetricVerdict) string {
	p := "none"
	if m.P != nil {
		p = num(*m.P)
	}
	tol := m.Tolerance
	if tol == "" {
		tol = "bound " + num(m.Bound)
	}
	return fmt.Sprintf("metric %s: golden %s, candidate %s, delta %s, tolerance %s, p %s",
		oneLine(m.Metric), opt(m.Golden), opt(m.Candidate), optSigned(m.Delta), oneLine(tol), p)
}

// outcomeWord is an outcome in capitals, for headers.
func outcomeWord(o golden.Outcome) string {
	if o == "" {
		return "UNKNOWN"
	}
	return strings.ToUpper(oneLine(string(o)))
}

// keyMetric returns the metric a one-row summary shows for p: the first
// gated metric with the worst outcome, or the first metric when none is
// gated, or nil.
func keyMetric(p *golden.ProbeVerdict) *golden.MetricVerdict {
	var best *golden.MetricVerdict
	for _, m := range p.Metrics {
		if !m.Gated {
			continue
		}
		if best == nil || golden.Worse(best.Outcome, m.Outcome) != best.Outcome {
			best = m
		}
	}
	if best == nil && len(p.Metrics) > 0 {
		best = p.Metrics[0]
	}
	return best
}

// failingMetric reports whether m fails the gate under allowNew.
func failingMetric(m *golden.MetricVerdict, allowNew bool) bool {
	return m.Gated && m.Outcome.Failing(allowNew)
}

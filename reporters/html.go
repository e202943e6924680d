package reporters

import (
	"bufio"
	"fmt"
	"html"
	"io"

	"sparsegate/golden"
)

// HTML writes the verdict as one self-contained page: inline CSS, inline
// SVG, no scripts and nothing fetched from the network. It holds the verdict
// table (table id "verdict"), the failing metrics and power warnings, and
// charts, each in a <section class="chart"> of its own with exactly one
// <svg>: per probe, its gated metrics' worsening against their tolerance
// bands; per sparsity probe, the kept fraction per layer; and, when the
// verdict has sensitivity rows, the per-layer sensitivity. The page reads at
// 1280 px wide and has print rules.
type HTML struct{}

// htmlStyle is the page's only stylesheet.
const htmlStyle = `body{font:14px/1.45 system-ui,-apple-system,"Segoe UI",Roboto,sans-serif;color:#1b1b1b;background:#fff;margin:0}
main{max-width:1240px;margin:0 auto;padding:16px 20px}
h1{font-size:22px;margin:8px 0}
h2{font-size:17px;margin:24px 0 8px}
table{border-collapse:collapse;width:100%;margin:8px 0}
th,td{border:1px solid #c8c8c8;padding:3px 6px;text-align:left;vertical-align:top}
th{background:#f2f2f2}
td.num{text-align:right;font-variant-numeric:tabular-nums;white-space:nowrap}
table.meta{width:auto}
table.meta th{font-weight:600;background:none}
tr.o-fail td,tr.o-error td{background:#fde4e4}
tr.o-improved td{background:#e2f4e2}
tr.o-new td,tr.o-missing td{background:#fff3d4}
tr.o-skipped td{color:#666}
.verdict-pass{color:#1b5e20}
.verdict-fail{color:#b71c1c}
section.chart svg{display:block;width:100%;max-width:1200px;height:auto}
code{font-family:ui-monospace,Menlo,Consolas,monospace}
p.caution{font-weight:600;border-top:1px solid #999;padding-top:10px;margin-top:32px}
@media print{
body{font-size:10pt}
main{max-width:none;padding:0}
section{break-inside:avoid;page-break-inside:avoid}
tr{break-inside:avoid}
tr.o-fail td,tr.o-error td,tr.o-improved td,tr.o-new td,tr.o-missing td{-webkit-print-color-adjust:exact;print-color-adjust:exact}
section.chart svg{max-width:100%}
}
`

// esc makes untrusted text safe in HTML text and quoted attributes.
func esc(s string) string {
	return html.EscapeString(visible(s))
}

// outcomeClass is the CSS class of an outcome's table row.
func outcomeClass(o golden.Outcome) string {
	switch o {
	case golden.Pass, golden.Improved, golden.Skipped, golden.New, golden.Missing, golden.Fail, golden.Error:
		return "o-" + string(o)
	}
	return "o-other"
}

// Report writes the page of v.
func (HTML) Report(w io.Writer, v *golden.Verdict) error {
	bw := bufio.NewWriter(w)
	verdict, class := "FAIL", "verdict-fail"
	if v.Passed {
		verdict, class = "PASS", "verdict-pass"
	}
	bw.WriteString("<!DOCTYPE html>\n<html lang=\"en\">\n<head>\n<meta charset=\"utf-8\">\n")
	bw.WriteString("<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\">\n")
	fmt.Fprintf(bw, "<title>sparsegate verdict: %s, suite %s</title>\n", verdict, esc(v.Suite.Name))
	bw.WriteString("<style>\n" + htmlStyle + "</style>\n</head>\n<body>\n<main>\n")
	fmt.Fprintf(bw, "<h1>sparsegate verdict: <span class=\"%s\">%s</span></h1>\n", class, verdict)
	fmt.Fprintf(bw, "<p>Suite <code>%s</code> (%s), outcome <strong>%s</strong>, %s</p>\n",
		esc(v.Suite.Name), esc(v.Suite.File), esc(string(v.Outcome)), esc(countLine(v)))
	writeMeta(bw, v)
	writeVerdictTable(bw, v)
	writeFailing(bw, v)
	n := 0
	for _, p := range v.Probes {
		if writeDeltaSection(bw, p, n) {
			n++
		}
	}
	for _, p := range v.Probes {
		if len(p.Units) > 0 {
			writeSparsitySection(bw, p, n)
			n++
		}
	}
	for _, g := range sensitivityGroups(v.Sensitivity) {
		writeSensitivitySection(bw, g, n)
		n++
	}
	fmt.Fprintf(bw, "<p class=\"caution\">%s</p>\n</main>\n</body>\n</html>\n", esc(Caution))
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("html report: %w", err)
	}
	return nil
}

// writeMeta writes what was compared: fingerprint, golden directory, shard.
func writeMeta(w *bufio.Writer, v *golden.Verdict) {
	fp := v.Fingerprint
	rows := [][2]string{
		{"suite hash", v.Suite.Hash},
		{"golden directory", v.GoldenDir},
		{"base weights", fp.BaseWeights},
		{"candidate weights", fp.CandidateWeights},
		{"manifest", fp.Manifest},
		{"tokenizer", fp.Tokenizer},
		{"harness", fp.Harness},
		{"shard", fmt.Sprintf("%d/%d", v.Shard.Index, v.Shard.Count)},
		{"new golden values", "fail the gate"},
	}
	if v.AllowNew {
		rows[len(rows)-1][1] = "allowed"
	}
	if g := v.GoldenFingerprint; g != nil {
		rows = append(rows, [2]string{"golden base weights", g.BaseWeights},
			[2]string{"golden candidate weights", g.CandidateWeights}, [2]string{"golden harness", g.Harness})
	}
	w.WriteString("<table class=\"meta\">\n")
	for _, r := range rows {
		if r[1] == "" {
			continue
		}
		fmt.Fprintf(w, "<tr><th>%s</th><td><code>%s</code></td></tr>\n", r[0], esc(r[1]))
	}
	w.WriteString("</table>\n")
}

// writeVerdictTable writes the table with one row per probe.
func writeVerdictTable(w *bufio.Writer, v *golden.Verdict) {
	w.WriteString("<section id=\"probes\">\n<h2>Probes</h2>\n<table id=\"verdict\">\n")
	w.WriteString("<thead><tr><th>probe</th><th>kind</th><th>outcome</th><th>items</th><th>seconds</th>" +
		"<th>key metric</th><th>golden</th><th>candidate</th><th>delta</th><th>bound</th><th>note</th></tr></thead>\n<tbody>\n")
	for _, p := range v.Probes {
		metric, g, c, d, b := "", "", "", "", ""
		if m := keyMetric(p); m != nil {
			metric, g, c, d, b = m.Metric, opt(m.Golden), opt(m.Candidate), optSigned(m.Delta), num(m.Bound)
		}
		fmt.Fprintf(w, "<tr class=\"%s\"><td>%s</td><td>%s</td><td>%s</td><td class=\"num\">%d</td><td class=\"num\">%s</td>"+
			"<td>%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td><td class=\"num\">%s</td><td>%s</td></tr>\n",
			outcomeClass(p.Outcome), esc(p.Name), esc(p.Kind), esc(string(p.Outcome)), p.Items, num(p.Seconds),
			esc(metric), g, c, d, b, esc(p.Note))
	}
	w.WriteString("</tbody>\n</table>\n</section>\n")
}

// writeFailing writes the failing metrics and the power warnings.
func writeFailing(w *bufio.Writer, v *golden.Verdict) {
	var failing, warnings []string
	for _, p := range v.Probes {
		if p.Outcome == golden.Error || (p.Outcome.Failing(v.AllowNew) && !anyFailing(p, v.AllowNew)) {
			s := "<code>" + esc(p.Name) + "</code>: " + esc(string(p.Outcome))
			if p.Note != "" {
				s += ": " + esc(p.Note)
			}
			failing = append(failing, s)
		}
		for _, m := range p.Metrics {
			if failingMetric(m, v.AllowNew) {
				failing = append(failing, "<code>"+esc(p.Name)+"</code>: "+esc(metricSummary(m)))
			}
			if m.PowerWarning != "" {
				warnings = append(warnings, "<code>"+esc(p.Name)+"</code> / "+esc(m.Metric)+": "+esc(m.PowerWarning))
			}
		}
	}
	for _, l := range []struct {
		id, title string
		items     []string
	}{{"failing", "Failing", failing}, {"power", "Power warnings", warnings}} {
		if len(l.items) == 0 {
			continue
		}
		fmt.Fprintf(w, "<section id=\"%s\">\n<h2>%s</h2>\n<ul>\n", l.id, l.title)
		for _, s := range l.items {
			w.WriteString("<li>" + s + "</li>\n")
		}
		w.WriteString("</ul>\n</section>\n")
	}
}

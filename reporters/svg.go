package reporters

import (
	"bufio"
	"fmt"
	"math"
	"slices"

	"sparsegate/golden"
)

// Chart geometry, in SVG user units (the viewBox is chartW wide and scales
// to the page).
const (
	chartW   = 1200.0
	rowH     = 26.0
	barH     = 14.0
	axisTop  = 34.0
	labelW   = 300.0 // metric names left of the plot
	valueW   = 300.0 // numbers right of the plot
	plotGap  = 10.0
	colH     = 220.0 // height of the column charts' plot
	colTop   = 40.0
	colLeft  = 60.0
	colRight = 20.0
)

// Colours of the charts.
const (
	colBand    = "#dbe7f3" // the tolerance band
	colWorse   = "#c62828" // beyond the bound
	colBetter  = "#2e7d32" // improved beyond the bound
	colInside  = "#5c6bc0" // within the band
	colAxis    = "#555"
	colMLP     = "#1565c0"
	colAttn    = "#ef6c00"
	colOtherUn = "#757575"
)

// f formats a coordinate.
func f(x float64) string {
	return fmt.Sprintf("%.1f", x)
}

// finite returns x, or 0 when x is NaN or infinite.
func finite(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

// sectionStart opens a chart section with its heading and caption.
func sectionStart(w *bufio.Writer, id, title, caption string) {
	fmt.Fprintf(w, "<section class=\"chart\" id=\"%s\">\n<h2>%s</h2>\n<p>%s</p>\n", id, title, caption)
}

// writeDeltaSection writes the chart of probe p's gated metrics against
// their tolerance bands, and reports whether it wrote one (probes without
// gated metrics get none).
func writeDeltaSection(w *bufio.Writer, p *golden.ProbeVerdict, n int) bool {
	var gated []*golden.MetricVerdict
	for _, m := range p.Metrics {
		if m.Gated {
			gated = append(gated, m)
		}
	}
	if len(gated) == 0 {
		return false
	}
	// ratio is worsening ÷ bound; the axis spans ±span, at least ±2 bounds,
	// at most ±10, and a value beyond is drawn at the edge.
	ratio := func(m *golden.MetricVerdict) (float64, bool) {
		wb, ok := worsening(m)
		if !ok || math.IsNaN(wb) {
			return 0, false
		}
		if m.Bound > 0 {
			return wb / m.Bound, true
		}
		switch {
		case wb > 0:
			return math.Inf(1), true
		case wb < 0:
			return math.Inf(-1), true
		}
		return 0, true
	}
	span := 2.0
	for _, m := range gated {
		if r, ok := ratio(m); ok && !math.IsInf(r, 0) {
			span = max(span, math.Ceil(math.Abs(r)))
		}
	}
	span = min(span, 10)
	x0, x1 := labelW+plotGap, chartW-valueW-plotGap
	x := func(r float64) float64 {
		r = max(-span, min(span, r))
		return x0 + (r+span)/(2*span)*(x1-x0)
	}
	h := axisTop + rowH*float64(len(gated)) + 10
	sectionStart(w, fmt.Sprintf("deltas-%d", n), "Probe "+esc(p.Name)+": metrics against tolerance",
		"Each bar is the candidate's worsening against golden divided by the metric's bound; right is worse. "+
			"The shaded band is the tolerance [−bound, +bound]; a red bar is beyond it.")
	fmt.Fprintf(w, "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 %s %s\" width=\"%s\" height=\"%s\" role=\"img\" aria-label=\"%s\">\n",
		f(chartW), f(h), f(chartW), f(h), esc("metrics of "+p.Name+" against tolerance"))
	fmt.Fprintf(w, "<rect x=\"%s\" y=\"%s\" width=\"%s\" height=\"%s\" fill=\"%s\"/>\n",
		f(x(-1)), f(axisTop-6), f(x(1)-x(-1)), f(h-axisTop), colBand)
	for _, t := range []float64{-span, -1, 0, 1, span} {
		width := "0.5"
		if t == 0 {
			width = "1.5"
		}
		fmt.Fprintf(w, "<line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\" stroke=\"%s\" stroke-width=\"%s\"/>\n",
			f(x(t)), f(axisTop-6), f(x(t)), f(h-4), colAxis, width)
		fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"12\" text-anchor=\"middle\" fill=\"%s\">%s×</text>\n",
			f(x(t)), f(axisTop-12), colAxis, signedTick(t))
	}
	for i, m := range gated {
		y := axisTop + rowH*float64(i)
		label := m.Metric
		if m.Nondeterministic {
			label += " (timing)"
		}
		fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"13\" text-anchor=\"end\">%s</text>\n",
			f(labelW), f(y+barH-2), esc(clip(label, 40)))
		r, ok := ratio(m)
		value := "no value (" + string(m.Outcome) + ")"
		if ok {
			wb, _ := worsening(m)
			color := colInside
			switch {
			case wb > m.Bound:
				color = colWorse
			case -wb > m.Bound:
				color = colBetter
			}
			a, b := x(0), x(r)
			if b < a {
				a, b = b, a
			}
			fmt.Fprintf(w, "<rect x=\"%s\" y=\"%s\" width=\"%s\" height=\"%s\" fill=\"%s\"><title>%s</title></rect>\n",
				f(a), f(y), f(max(b-a, 1)), f(barH), color, esc(metricSummary(m)))
			value = opt(m.Golden) + " → " + opt(m.Candidate) + " (" + optSigned(m.Delta) + ", bound " + num(m.Bound) + ")"
		}
		fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"12\">%s</text>\n", f(x1+plotGap), f(y+barH-2), esc(clip(value, 60)))
	}
	w.WriteString("</svg>\n</section>\n")
	return true
}

// signedTick labels an axis tick in bounds.
func signedTick(t float64) string {
	switch {
	case t > 0:
		return "+" + num(t)
	case t < 0:
		return "−" + num(-t)
	}
	return "0"
}

// components returns the distinct components of units in chart order: mlp,
// attention, then the others by name.
func components(names []string) []string {
	var out []string
	for _, c := range names {
		if !slices.Contains(out, c) {
			out = append(out, c)
		}
	}
	rank := func(c string) int {
		switch c {
		case "mlp":
			return 0
		case "attention":
			return 1
		}
		return 2
	}
	slices.SortFunc(out, func(a, b string) int {
		if ra, rb := rank(a), rank(b); ra != rb {
			return ra - rb
		}
		switch {
		case a < b:
			return -1
		case a > b:
			return 1
		}
		return 0
	})
	return out
}

// componentColor is the bar colour of a component.
func componentColor(c string) string {
	switch c {
	case "mlp":
		return colMLP
	case "attention":
		return colAttn
	}
	return colOtherUn
}

// A column is one bar of a per-layer column chart.
type column struct {
	layer     int
	component string
	value     float64
	title     string
}

// writeColumns draws per-layer columns grouped by layer and coloured by
// component, values from lo to hi on the y axis (lo < 0 < hi draws a zero
// line), with a legend and axis ticks.
func writeColumns(w *bufio.Writer, label string, cols []column, lo, hi float64, ticks []float64) {
	var layers []int
	var comps []string
	for _, c := range cols {
		if !slices.Contains(layers, c.layer) {
			layers = append(layers, c.layer)
		}
		comps = append(comps, c.component)
	}
	slices.Sort(layers)
	order := components(comps)
	h := colTop + colH + 40
	fmt.Fprintf(w, "<svg xmlns=\"http://www.w3.org/2000/svg\" viewBox=\"0 0 %s %s\" width=\"%s\" height=\"%s\" role=\"img\" aria-label=\"%s\">\n",
		f(chartW), f(h), f(chartW), f(h), esc(label))
	plotW := chartW - colLeft - colRight
	y := func(v float64) float64 {
		v = max(lo, min(hi, finite(v)))
		return colTop + (hi-v)/(hi-lo)*colH
	}
	for _, t := range ticks {
		fmt.Fprintf(w, "<line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\" stroke=\"#ddd\" stroke-width=\"1\"/>\n",
			f(colLeft), f(y(t)), f(chartW-colRight), f(y(t)))
		fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"12\" text-anchor=\"end\" fill=\"%s\">%s</text>\n",
			f(colLeft-6), f(y(t)+4), colAxis, num(t))
	}
	fmt.Fprintf(w, "<line x1=\"%s\" y1=\"%s\" x2=\"%s\" y2=\"%s\" stroke=\"%s\" stroke-width=\"1.5\"/>\n",
		f(colLeft), f(y(0)), f(chartW-colRight), f(y(0)), colAxis)
	groupW := plotW / float64(max(len(layers), 1))
	barW := groupW * 0.8 / float64(max(len(order), 1))
	step := (len(layers) + 39) / 40 // at most about 40 layer labels
	for i, l := range layers {
		if i%max(step, 1) == 0 {
			fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"11\" text-anchor=\"middle\" fill=\"%s\">%d</text>\n",
				f(colLeft+groupW*(float64(i)+0.5)), f(colTop+colH+16), colAxis, l)
		}
	}
	fmt.Fprintf(w, "<text x=\"%s\" y=\"%s\" font-size=\"12\" text-anchor=\"middle\" fill=\"%s\">layer</text>\n",
		f(colLeft+plotW/2), f(colTop+colH+34), colAxis)
	drawn := map[[2]int]bool{}
	for _, c := range cols {
		li, ci := slices.Index(layers, c.layer), slices.Index(order, c.component)
		if drawn[[2]int{li, ci}] {
			continue // a repeated unit: the first one counts
		}
		drawn[[2]int{li, ci}] = true
		bx := colLeft + groupW*float64(li) + groupW*0.1 + barW*float64(ci)
		top, bottom := y(c.value), y(0)
		if top > bottom {
			top, bottom = bottom, top
		}
		fmt.Fprintf(w, "<rect x=\"%s\" y=\"%s\" width=\"%s\" height=\"%s\" fill=\"%s\"><title>%s</title></rect>\n",
			f(bx), f(top), f(max(barW, 0.5)), f(max(bottom-top, 0.5)), componentColor(c.component), esc(c.title))
	}
	for i, c := range order {
		lx := colLeft + float64(i)*160
		fmt.Fprintf(w, "<rect x=\"%s\" y=\"8\" width=\"12\" height=\"12\" fill=\"%s\"/>\n", f(lx), componentColor(c))
		fmt.Fprintf(w, "<text x=\"%s\" y=\"18\" font-size=\"12\">%s</text>\n", f(lx+16), esc(clip(c, 20)))
	}
	w.WriteString("</svg>\n")
}

// writeSparsitySection writes the kept fraction per layer of a sparsity
// probe, MLP and attention side by side.
func writeSparsitySection(w *bufio.Writer, p *golden.ProbeVerdict, n int) {
	cols := make([]column, 0, len(p.Units))
	for _, u := range p.Units {
		t := fmt.Sprintf("layer %d %s: kept %s", u.Layer, u.Component, num(u.Kept))
		if u.Recall != nil {
			t += ", recall " + num(*u.Recall)
		}
		if u.Rule != "" {
			t += ", rule " + u.Rule
		}
		cols = append(cols, column{u.Layer, u.Component, u.Kept, t})
	}
	sectionStart(w, fmt.Sprintf("sparsity-%d", n), "Probe "+esc(p.Name)+": achieved sparsity per layer",
		"Mean fraction of each layer's MLP neurons and attention heads computed per token (1 is dense).")
	writeColumns(w, "kept fraction per layer of "+p.Name, cols, 0, 1, []float64{0, 0.25, 0.5, 0.75, 1})
	w.WriteString("</section>\n")
}

// A sensitivityGroup is the sensitivity rows of one probe, metric and mode.
type sensitivityGroup struct {
	probe, metric, mode string
	rows                []golden.Sensitivity
}

// sensitivityGroups groups rows by probe, metric and mode, in the order each
// group first appears.
func sensitivityGroups(rows []golden.Sensitivity) []*sensitivityGroup {
	var out []*sensitivityGroup
	for _, r := range rows {
		i := slices.IndexFunc(out, func(g *sensitivityGroup) bool {
			return g.probe == r.Probe && g.metric == r.Metric && g.mode == r.Mode
		})
		if i < 0 {
			out = append(out, &sensitivityGroup{probe: r.Probe, metric: r.Metric, mode: r.Mode})
			i = len(out) - 1
		}
		out[i].rows = append(out[i].rows, r)
	}
	return out
}

// writeSensitivitySection writes how much each unit alone moved a metric.
func writeSensitivitySection(w *bufio.Writer, g *sensitivityGroup, n int) {
	top := 0.0
	cols := make([]column, 0, len(g.rows))
	for _, r := range g.rows {
		top = max(top, math.Abs(finite(r.Delta)))
		cols = append(cols, column{r.Layer, r.Component, r.Delta,
			fmt.Sprintf("layer %d %s: %s %s, delta %s", r.Layer, r.Component, g.metric, num(r.Value), signed(r.Delta))})
	}
	if top == 0 {
		top = 1
	}
	sectionStart(w, fmt.Sprintf("sensitivity-%d", n),
		"Sensitivity: "+esc(g.probe)+" / "+esc(g.metric)+" ("+esc(g.mode)+")",
		"Change of the metric when one unit alone is switched ("+esc(g.mode)+"), per layer and component.")
	writeColumns(w, "sensitivity of "+g.metric+" per layer", cols, -top, top, []float64{-top, -top / 2, 0, top / 2, top})
	w.WriteString("</section>\n")
}

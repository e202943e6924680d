package gen

import (
	"fmt"
	"math/rand/v2"
	"slices"
	"strings"
)

// Drill draws one retrieval drill: the same paperwork lines as Document, but
// packed with in-context lookups so a small model meets many of them early in
// training (the trainer's curriculum). A drill is a run of sections, each a
// depot table or a route followed by questions about most of its rows, in a
// random order, and sometimes a second table that gives some of the same
// depots new codes, so that only the latest table answers. Weekday records
// are mixed in, since they are the other fact the prompt alone does not
// settle without learning.
//
// skip reports a question context (in the probe items' own format) that
// must not occur in training; a section that would contain one is redrawn.
func (w *World) Drill(r *rand.Rand, skip func(string) bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "Drill sheet, %s, %s.\n\n", w.Depots[r.IntN(len(w.Depots))], w.Weekdays[r.IntN(7)])
	for i, n := 0, 3+r.IntN(3); i < n; i++ {
		if i > 0 {
			b.WriteString("\n\n")
		}
		switch k := r.IntN(5); {
		case k < 2:
			w.drillTables(r, &b, skip)
		case k < 4:
			w.drillRoute(r, &b, skip)
		default:
			w.answered(r, &b, "weekday", 3+r.IntN(4), nil)
		}
	}
	b.WriteString("\n")
	return b.String()
}

// drillTables writes a depot table and questions on it; half the time a
// second table follows that recodes some of the same depots.
func (w *World) drillTables(r *rand.Rand, b *strings.Builder, skip func(string) bool) {
	for {
		var s strings.Builder
		depots := pick(r, w.Depots, 3+r.IntN(6))
		codes := pick(r, w.Codes, len(depots))
		if !w.writeTable(r, &s, depots, codes, skip) {
			continue
		}
		if r.IntN(2) == 0 {
			// Recode a shuffled subset, plus a newcomer or two.
			next := append([]string(nil), depots[:1+r.IntN(len(depots))]...)
			for _, d := range pick(r, w.Depots, 2) {
				if !slices.Contains(next, d) {
					next = append(next, d)
				}
			}
			r.Shuffle(len(next), func(i, j int) { next[i], next[j] = next[j], next[i] })
			s.WriteString("\n\n")
			if !w.writeTable(r, &s, next, pick(r, w.Codes, len(next)), skip) {
				continue
			}
		}
		b.WriteString(s.String())
		return
	}
}

// writeTable writes one table and a question for most of its rows; it
// reports false (and the caller redraws) when a question's context is one
// skip refuses.
func (w *World) writeTable(r *rand.Rand, b *strings.Builder, depots, codes []string, skip func(string) bool) bool {
	var t strings.Builder
	t.WriteString("Depot table:\n")
	for i := range depots {
		fmt.Fprintf(&t, "- %s = %s\n", depots[i], codes[i])
	}
	order := r.Perm(len(depots))
	order = order[:max(1, len(order)-r.IntN(2))]
	for _, q := range order {
		if skip != nil && skip(t.String()+"Code for "+depots[q]+":") {
			return false
		}
	}
	b.WriteString(t.String())
	for i, q := range order {
		if i > 0 {
			b.WriteString("\n")
		}
		fmt.Fprintf(b, "Code for %s: %s", depots[q], codes[q])
	}
	return true
}

// drillRoute writes a route and next-stop questions for most of its stops.
func (w *World) drillRoute(r *rand.Rand, b *strings.Builder, skip func(string) bool) {
	for {
		stops := pick(r, w.Depots, 5+r.IntN(5))
		head := fmt.Sprintf("Route %d: %s.\n", 1+r.IntN(40), strings.Join(stops, ", "))
		order := r.Perm(len(stops) - 1)
		order = order[:max(1, len(order)-r.IntN(3))]
		ok := true
		for _, q := range order {
			if skip != nil && skip(head+"After "+stops[q]+" comes:") {
				ok = false
			}
		}
		if !ok {
			continue
		}
		b.WriteString(head)
		for i, q := range order {
			if i > 0 {
				b.WriteString("\n")
			}
			fmt.Fprintf(b, "After %s comes: %s", stops[q], stops[q+1])
		}
		return
	}
}

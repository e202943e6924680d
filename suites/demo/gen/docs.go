package gen

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// Document draws one in-domain document: a header line, then three to six
// sections separated by blank lines. Sections are the probe families'
// records, answered, plus notes, so a document reads like a day's paperwork
// and like a few-shot prompt at once.
func (w *World) Document(r *rand.Rand) string { return w.document(r, nil) }

// document is Document, calling rec (when set) with every question context it
// writes, so held-out items can be kept apart from training text.
func (w *World) document(r *rand.Rand, rec func(string)) string {
	var b strings.Builder
	kind := []string{"Dispatch log", "Route sheet", "Depot notes", "Parcel ledger"}[r.IntN(4)]
	run := []string{"morning run", "afternoon run", "night run"}[r.IntN(3)]
	fmt.Fprintf(&b, "%s, %s, %s %s.\n\n", kind, w.Depots[r.IntN(len(w.Depots))], w.Weekdays[r.IntN(7)], run)
	n := 3 + r.IntN(4)
	for i := 0; i < n; i++ {
		if i > 0 {
			b.WriteString("\n\n")
		}
		switch k := r.IntN(14); {
		case k < 4:
			w.lookupSection(r, &b, rec)
		case k < 8:
			w.routeSection(r, &b, rec)
		case k < 10:
			w.answered(r, &b, "sum", 2+r.IntN(4), rec)
		case k < 11:
			w.answered(r, &b, "status", 1+r.IntN(4), rec)
		case k < 13:
			w.answered(r, &b, "weekday", 2+r.IntN(4), rec)
		default:
			b.WriteString(w.note(r))
		}
	}
	b.WriteString("\n")
	return b.String()
}

// answered writes n answered records of a single-line family.
func (w *World) answered(r *rand.Rand, b *strings.Builder, family string, n int, rec func(string)) {
	for i := 0; i < n; i++ {
		if i > 0 {
			b.WriteString("\n")
		}
		ctx, ans, _ := w.question(r, family)
		if rec != nil {
			rec(ctx)
		}
		b.WriteString(ctx + ans)
		if family == "sum" {
			b.WriteString(" kg.")
		} else if family != "status" {
			b.WriteString(".")
		}
	}
}

// lookupSection writes a depot table followed by one to three lookups in it.
func (w *World) lookupSection(r *rand.Rand, b *strings.Builder, rec func(string)) {
	ctx, ans, _ := w.question(r, "lookup")
	if rec != nil {
		rec(ctx)
	}
	b.WriteString(ctx + ans)
	lines := strings.Split(ctx, "\n")
	table := lines[1 : len(lines)-1]
	for extra := 1 + r.IntN(4); extra > 0; extra-- {
		row := strings.SplitN(strings.TrimPrefix(table[r.IntN(len(table))], "- "), " = ", 2)
		fmt.Fprintf(b, "\nCode for %s: %s", row[0], row[1])
	}
}

// routeSection writes a route followed by one to three next-stop lines.
func (w *World) routeSection(r *rand.Rand, b *strings.Builder, rec func(string)) {
	ctx, ans, _ := w.question(r, "next")
	if rec != nil {
		rec(ctx)
	}
	b.WriteString(ctx + ans)
	head := ctx[:strings.Index(ctx, ".\n")]
	stops := strings.Split(head[strings.Index(head, ": ")+2:], ", ")
	for extra := 1 + r.IntN(4); extra > 0; extra-- {
		q := r.IntN(len(stops) - 1)
		fmt.Fprintf(b, "\nAfter %s comes: %s", stops[q], stops[q+1])
	}
}

// note writes a sentence or two of ordinary paperwork.
func (w *World) note(r *rand.Rand) string {
	d := func() string { return w.Depots[r.IntN(len(w.Depots))] }
	switch r.IntN(6) {
	case 0:
		return fmt.Sprintf("Note: the van on route %d carries at most %d parcels or %d kg, whichever comes first.", 1+r.IntN(40), 20+5*r.IntN(9), 300+50*r.IntN(9))
	case 1:
		return fmt.Sprintf("Note: the ferry from %s to %s runs on %s and %s only.", d(), d(), w.Weekdays[r.IntN(7)], w.Weekdays[r.IntN(7)])
	case 2:
		return fmt.Sprintf("Note: parcels over %d kg go by the %s cart, not the van.", 15+r.IntN(10), d())
	case 3:
		return fmt.Sprintf("Note: %s closes early on %s; hand over before %d o'clock.", d(), w.Weekdays[r.IntN(7)], 1+r.IntN(5))
	case 4:
		return fmt.Sprintf("Note: new sorting shelves at %s. Labels face out, heaviest at the bottom.", d())
	default:
		return fmt.Sprintf("Note: driver change at %s; the %s run is covered by the %s crew.", d(), w.Weekdays[r.IntN(7)], d())
	}
}

// Bulletin draws one weather bulletin, the held-out split of another
// register: same place names, different vocabulary and shape.
func (w *World) Bulletin(r *rand.Rand) string {
	var b strings.Builder
	sky := []string{"fog banks", "low cloud", "bright spells", "squally showers", "sea mist", "steady rain", "clear skies"}
	wind := []string{"north", "north-east", "east", "south-east", "south", "south-west", "west", "north-west"}
	sea := []string{"smooth", "slight", "moderate", "rough", "very rough"}
	fmt.Fprintf(&b, "Coastal weather bulletin for %s, issued at %02d:00.\n", w.Weekdays[r.IntN(7)], 4+2*r.IntN(8))
	for i, n := 0, 2+r.IntN(4); i < n; i++ {
		fmt.Fprintf(&b, "Around %s: %s, wind %s force %d, sea %s, visibility %s.\n",
			w.Depots[r.IntN(len(w.Depots))], sky[r.IntN(len(sky))], wind[r.IntN(len(wind))], 1+r.IntN(8),
			sea[r.IntN(len(sea))], []string{"good", "moderate", "poor", "very poor"}[r.IntN(4)])
	}
	if r.IntN(2) == 0 {
		fmt.Fprintf(&b, "Outlook: %s later, easing by %s.\n", sky[r.IntN(len(sky))], w.Weekdays[r.IntN(7)])
	}
	return b.String()
}

// Package gen writes the demo scenario's text and probe items: an invented
// coastal courier network, the Quillmere Coast Post, with depots, depot codes,
// routes, parcels, weights, weekdays and weather. Everything is drawn from a
// seeded generator, so a seed fixes every byte.
//
// # Splits
//
// The training split, the in-domain held-out split and the probe items are
// drawn from independent random streams; held-out documents and probe items
// are checked against the training documents and each other, so no document
// or item appears in two places. The weather bulletins are a held-out split of
// a different register that training never sees.
//
// # Probe families
//
// Each item is a context that ends where the answer starts, four options
// (each starting with a space), and the index of the right one; the right
// option is also the generation target (stop at a newline). Few-shot prompts
// join solved examples with a blank line ("\n\n") before the item's context.
//
//	lookup   a depot's code, from a table given only in the prompt (in-context retrieval)
//	next     the stop after a given one, on a route listed in the prompt
//	sum      the sum of two parcel weights
//	status   a log line's status (on time, delayed, damaged, returned) from its wording
//	weekday  the weekday a number of days after another
package gen

import (
	"fmt"
	"math/rand/v2"
	"strings"
)

// World is the fixed part of the scenario for one seed: the depots, and the
// words the paperwork uses.
type World struct {
	// Depots are the network's depot names.
	Depots []string
	// Weekdays are the days of the week, Monday first.
	Weekdays []string
	// Statuses are the four parcel statuses.
	Statuses []string
	// Wording lists, per status, how a log line says it; %s is the depot.
	Wording map[string][]string
	// Codes is the network's codebook of three-letter depot codes; each depot
	// table pairs its depots with codes drawn afresh from it, so a pairing is
	// known only from the table itself.
	Codes []string
}

// NewWorld draws the network's depots: invented names, a prefix and a suffix.
func NewWorld(seed uint64) *World {
	prefixes := []string{"Salt", "Gull", "Brine", "Kelp", "Cormor", "Lantern", "Drift", "Shingle",
		"Heron", "Skerry", "Wrack", "Tern", "Fog", "Cockle", "Limpet", "Marram", "Quill", "Oyster",
		"Eel", "Dune", "Spindrift", "Puffin", "Sorrel", "Cobble"}
	suffixes := []string{"haven", "combe", "wick", "mouth", "ness", "holm", "strand", "reach",
		"cove", "quay", "point", "steps", "yard", "sands", "rock", "gate"}
	r := rand.New(rand.NewPCG(seed, 1))
	var all []string
	for _, p := range prefixes {
		for _, s := range suffixes {
			all = append(all, p+s)
		}
	}
	r.Shuffle(len(all), func(i, j int) { all[i], all[j] = all[j], all[i] })
	codes := map[string]bool{}
	var book []string
	for len(book) < 150 {
		if c := code(r); !codes[c] {
			codes[c] = true
			book = append(book, c)
		}
	}
	return &World{
		Codes:    book,
		Depots:   all[:72],
		Weekdays: []string{"Monday", "Tuesday", "Wednesday", "Thursday", "Friday", "Saturday", "Sunday"},
		Statuses: []string{"on time", "delayed", "damaged", "returned"},
		Wording: map[string][]string{
			"on time": {"arrived at %s as planned", "was handed over at %s on schedule", "reached %s on time",
				"was delivered to %s before noon as booked", "came into %s with the first van, as expected"},
			"delayed": {"waited at %s for the late ferry", "missed the morning van at %s", "was held at %s by fog",
				"reached %s two hours behind schedule", "sat at %s until the causeway opened"},
			"damaged": {"reached %s with a torn corner", "arrived at %s soaked through", "was found crushed at %s",
				"came into %s with a split seam", "reached %s with its seal broken"},
			"returned": {"came back from %s unclaimed", "was sent back to %s: nobody home", "went back to the sender from %s",
				"was refused at %s and sent back", "returned to %s after three failed calls"},
		},
	}
}

// pick returns n distinct elements of s.
func pick(r *rand.Rand, s []string, n int) []string {
	idx := r.Perm(len(s))[:n]
	out := make([]string, n)
	for i, j := range idx {
		out[i] = s[j]
	}
	return out
}

func code(r *rand.Rand) string {
	b := make([]byte, 3)
	for i := range b {
		b[i] = byte('A' + r.IntN(26))
	}
	return string(b)
}

func parcelID(r *rand.Rand) string {
	return fmt.Sprintf("%c%c-%04d", 'A'+r.IntN(26), 'A'+r.IntN(26), r.IntN(10000))
}

// An Item is one probe question.
type Item struct {
	// ID names the item, e.g. "lookup-0007".
	ID string `json:"id"`
	// Context is the prompt; it ends where the answer starts.
	Context string `json:"context"`
	// Options are the four candidate answers, each starting with a space.
	Options []string `json:"options"`
	// Answer is the index of the right option.
	Answer int `json:"answer"`
	// Target is the right option, the reference for generation.
	Target string `json:"target"`
}

// Families lists the probe families in a fixed order.
func Families() []string { return []string{"lookup", "next", "sum", "status", "weekday"} }

// question draws one item of the family: its context, right answer and three
// distractors. Training documents reuse the same sections, answered.
func (w *World) question(r *rand.Rand, family string) (ctx, answer string, wrong []string) {
	switch family {
	case "lookup":
		n := 3 + r.IntN(3)
		depots := pick(r, w.Depots, n)
		codes := pick(r, w.Codes, n)
		seen := map[string]bool{}
		for _, c := range codes {
			seen[c] = true
		}
		var b strings.Builder
		b.WriteString("Depot table:\n")
		for i := range depots {
			fmt.Fprintf(&b, "- %s = %s\n", depots[i], codes[i])
		}
		q := r.IntN(n)
		fmt.Fprintf(&b, "Code for %s:", depots[q])
		for _, j := range r.Perm(n) {
			if j != q && len(wrong) < 3 {
				wrong = append(wrong, " "+codes[j])
			}
		}
		for len(wrong) < 3 { // tables of three: one distractor from outside
			c := w.Codes[r.IntN(len(w.Codes))]
			if !seen[c] {
				seen[c] = true
				wrong = append(wrong, " "+c)
			}
		}
		return b.String(), " " + codes[q], wrong
	case "next":
		n := 5 + r.IntN(4)
		stops := pick(r, w.Depots, n)
		q := r.IntN(n - 1)
		ctx = fmt.Sprintf("Route %d: %s.\nAfter %s comes:", 1+r.IntN(40), strings.Join(stops, ", "), stops[q])
		for _, j := range r.Perm(n) {
			if j != q+1 && j != q && len(wrong) < 3 {
				wrong = append(wrong, " "+stops[j])
			}
		}
		return ctx, " " + stops[q+1], wrong
	case "sum":
		a, b := 1+r.IntN(20), 1+r.IntN(20)
		s := a + b
		ctx = fmt.Sprintf("At %s, a parcel of %d kg and a parcel of %d kg weigh together", w.Depots[r.IntN(len(w.Depots))], a, b)
		seen := map[int]bool{s: true}
		for _, d := range r.Perm(8) {
			v := s + []int{-1, 1, -2, 2, -10, 10, -3, 3}[d]
			if v >= 2 && !seen[v] && len(wrong) < 3 {
				seen[v] = true
				wrong = append(wrong, fmt.Sprintf(" %d", v))
			}
		}
		return ctx, fmt.Sprintf(" %d", s), wrong
	case "status":
		st := w.Statuses[r.IntN(len(w.Statuses))]
		forms := w.Wording[st]
		ctx = fmt.Sprintf("Log: %s %s. Status:", parcelID(r), fmt.Sprintf(forms[r.IntN(len(forms))], w.Depots[r.IntN(len(w.Depots))]))
		for _, o := range w.Statuses {
			if o != st {
				wrong = append(wrong, " "+o)
			}
		}
		return ctx, " " + st, wrong
	case "weekday":
		d, n := r.IntN(7), 1+r.IntN(6)
		later := "days"
		if n == 1 {
			later = "day"
		}
		ctx = fmt.Sprintf("Sent from %s on %s, delivered %d %s later, on", w.Depots[r.IntN(len(w.Depots))], w.Weekdays[d], n, later)
		ans := (d + n) % 7
		for _, j := range r.Perm(7) {
			if j != ans && len(wrong) < 3 {
				wrong = append(wrong, " "+w.Weekdays[j])
			}
		}
		return ctx, " " + w.Weekdays[ans], wrong
	}
	panic("gen: unknown family " + family)
}

// FewShotPrompt is the k-shot prompt for it: k distinct solved examples drawn
// from pool with r (context then right answer, each followed by a blank
// line), then the item's context.
func FewShotPrompt(pool []Item, it Item, k int, r *rand.Rand) string {
	var b strings.Builder
	for _, j := range r.Perm(len(pool))[:k] {
		b.WriteString(pool[j].Context + pool[j].Target + "\n\n")
	}
	b.WriteString(it.Context)
	return b.String()
}

// NewItem draws one probe item of the family with the right option at a
// random position.
func (w *World) NewItem(r *rand.Rand, family string, id int) Item {
	ctx, ans, wrong := w.question(r, family)
	opts := append([]string{ans}, wrong...)
	perm := r.Perm(4)
	shuffled := make([]string, 4)
	answer := 0
	for i, p := range perm {
		shuffled[p] = opts[i]
		if i == 0 {
			answer = p
		}
	}
	return Item{ID: fmt.Sprintf("%s-%04d", family, id), Context: ctx, Options: shuffled, Answer: answer, Target: ans}
}

package sparsity

import (
	"fmt"
	"io"
	"slices"
	"strings"
)

// Stats accumulates, per unit, what a build's hook kept while it ran: tokens
// seen, units kept, and (when the hook measures it) recall against the
// oracle set of the same size. The zero value is ready to use. A Stats is not
// safe for concurrent use; give each goroutine its own and Merge them.
type Stats struct {
	units map[Unit]*UnitStats
}

// UnitStats are one unit's counts.
type UnitStats struct {
	// Tokens is the number of tokens the unit's rule was consulted for.
	Tokens int64
	// Kept is the number of units kept, summed over tokens.
	Kept int64
	// Width is the number of units of the component (FFN or heads).
	Width int
	// RecallHits sums |kept ∩ oracle| over the tokens where recall was measured.
	RecallHits int64
	// RecallOf sums |oracle| over the same tokens, where the oracle is the
	// top |kept| by magnitude less its exact zeros.
	RecallOf int64
}

// NewStats returns empty statistics.
func NewStats() *Stats { return &Stats{} }

func (s *Stats) get(u Unit, width int) *UnitStats {
	if s.units == nil {
		s.units = map[Unit]*UnitStats{}
	}
	us := s.units[u]
	if us == nil {
		us = &UnitStats{Width: width}
		s.units[u] = us
	}
	return us
}

// Add records one token at unit u: kept of width units ran.
func (s *Stats) Add(u Unit, width, kept int) {
	us := s.get(u, width)
	us.Tokens++
	us.Kept += int64(kept)
}

// AddRecall records one recall measurement at unit u: hits of the of units in
// the oracle set were kept.
func (s *Stats) AddRecall(u Unit, width, hits, of int) {
	us := s.get(u, width)
	us.RecallHits += int64(hits)
	us.RecallOf += int64(of)
}

// Merge adds o's counts into s.
func (s *Stats) Merge(o *Stats) {
	for u, v := range o.units {
		us := s.get(u, v.Width)
		us.Tokens += v.Tokens
		us.Kept += v.Kept
		us.RecallHits += v.RecallHits
		us.RecallOf += v.RecallOf
	}
}

// Unit returns u's counts and whether any were recorded.
func (s *Stats) Unit(u Unit) (UnitStats, bool) {
	us, ok := s.units[u]
	if !ok {
		return UnitStats{}, false
	}
	return *us, true
}

// KeptFraction returns the fraction of u's units that ran, over all tokens
// seen: Kept / (Tokens · Width); 0 when nothing was recorded.
func (s *Stats) KeptFraction(u Unit) float64 {
	us, ok := s.units[u]
	if !ok || us.Tokens == 0 || us.Width == 0 {
		return 0
	}
	return float64(us.Kept) / (float64(us.Tokens) * float64(us.Width))
}

// Recall returns u's recall, Σ|kept ∩ oracle| / Σ|oracle| over the measured
// tokens (the oracle set being the |kept| units of largest magnitude), and
// false when recall was not measured for u.
func (s *Stats) Recall(u Unit) (float64, bool) {
	us, ok := s.units[u]
	if !ok || us.RecallOf == 0 {
		return 0, false
	}
	return float64(us.RecallHits) / float64(us.RecallOf), true
}

// Units returns the units with statistics, by layer, mlp before attention.
func (s *Stats) Units() []Unit {
	out := make([]Unit, 0, len(s.units))
	for u := range s.units {
		out = append(out, u)
	}
	slices.SortFunc(out, compareUnits)
	return out
}

// WriteTable writes one line per unit, in Units order: tokens, width, mean
// units kept per token, kept fraction and recall ("-" when not measured).
// The same counts always print the same bytes.
func (s *Stats) WriteTable(w io.Writer) error {
	var b strings.Builder
	fmt.Fprintf(&b, "%-22s %10s %6s %10s %8s %8s\n", "unit", "tokens", "width", "mean kept", "kept", "recall")
	for _, u := range s.Units() {
		us := s.units[u]
		mean := 0.0
		if us.Tokens > 0 {
			mean = float64(us.Kept) / float64(us.Tokens)
		}
		recall := "-"
		if r, ok := s.Recall(u); ok {
			recall = fmt.Sprintf("%.4f", r)
		}
		fmt.Fprintf(&b, "%-22s %10d %6d %10.2f %8.4f %8s\n", u.String(), us.Tokens, us.Width, mean, s.KeptFraction(u), recall)
	}
	_, err := io.WriteString(w, b.String())
	return err
}

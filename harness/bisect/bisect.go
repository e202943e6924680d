// Package bisect finds which units of a sparse build cause a regression: a
// search over the set of units left sparse (the rest run dense) for a
// smallest set that still fails, by delta debugging (ddmin: A. Zeller and
// R. Hildebrandt, "Simplifying and Isolating Failure-Inducing Input", IEEE
// Transactions on Software Engineering 28(2), 2002). With one culprit the
// search is a binary split: about 2·log₂ n tests. The result is 1-minimal:
// making any single reported unit dense makes the test pass.
//
// The package knows nothing of models: a test is a function of the set of
// sparse unit indices, so it is checked on synthetic predicates and driven by
// the runner in the command.
package bisect

import (
	"fmt"
	"slices"
	"strings"
)

// An Outcome is what one test of a set of sparse units gave.
type Outcome int

// Outcomes of a test.
const (
	Pass       Outcome = iota // the probes pass with this set sparse
	Fail                      // the probes fail
	Unresolved                // the test could not decide (an error)
)

func (o Outcome) String() string {
	return [...]string{"pass", "fail", "unresolved"}[o]
}

// A Test runs the probes with exactly the units in sparse (ascending
// indices) left sparse and returns the outcome and a one-line note (the
// metric value, say).
type Test func(sparse []int) (Outcome, string)

// A Step is one test the search ran.
type Step struct {
	Sparse  []int   `json:"sparse"`
	Outcome Outcome `json:"outcome"`
	Note    string  `json:"note,omitempty"`
}

// Statuses of a search.
const (
	Found     = "found"      // culprits found
	NoCulprit = "no-culprit" // it fails with every unit dense: the masks are not the cause
	Passes    = "passes"     // it passes with every unit sparse: nothing to bisect
	Undecided = "unresolved" // an endpoint test could not decide
)

// A Result is the outcome of a search.
type Result struct {
	// Status is Found, NoCulprit, Passes or "unresolved" (an endpoint test
	// could not decide).
	Status string
	// Culprits is the 1-minimal failing set (Found only).
	Culprits []int
	// Interaction is true when more than one unit is needed to fail.
	Interaction bool
	// Steps are the tests in the order they ran; Runs counts them (repeated
	// sets are answered from memory and not counted).
	Steps []Step
	Runs  int
}

// Search confirms the endpoints (all n units sparse must fail, none sparse
// must pass), then runs ddmin over the units.
func Search(n int, test Test) Result {
	s := &searcher{test: test, memo: map[string]Outcome{}}
	all := make([]int, n)
	for i := range all {
		all[i] = i
	}
	res := Result{}
	switch s.run(all) {
	case Pass:
		res.Status = Passes
	case Unresolved:
		res.Status = Undecided
	default:
		switch s.run(nil) {
		case Fail:
			res.Status = NoCulprit
		case Unresolved:
			res.Status = Undecided
		default:
			res.Status = Found
			res.Culprits = s.ddmin(all, 2)
			res.Interaction = len(res.Culprits) > 1
		}
	}
	res.Steps, res.Runs = s.steps, len(s.steps)
	return res
}

type searcher struct {
	test  Test
	memo  map[string]Outcome
	steps []Step
}

func key(set []int) string {
	var b strings.Builder
	for _, v := range set {
		fmt.Fprintf(&b, "%d,", v)
	}
	return b.String()
}

// run tests a set once; a repeated set is answered from memory.
func (s *searcher) run(set []int) Outcome {
	k := key(set)
	if o, ok := s.memo[k]; ok {
		return o
	}
	o, note := s.test(slices.Clone(set))
	s.memo[k] = o
	s.steps = append(s.steps, Step{Sparse: slices.Clone(set), Outcome: o, Note: note})
	return o
}

// split cuts c into n nearly equal contiguous parts.
func split(c []int, n int) [][]int {
	var parts [][]int
	start := 0
	for i := range n {
		end := start + (len(c)-start)/(n-i)
		parts = append(parts, c[start:end])
		start = end
	}
	return parts
}

func minus(c, d []int) []int {
	var out []int
	for _, v := range c {
		if !slices.Contains(d, v) {
			out = append(out, v)
		}
	}
	return out
}

// ddmin reduces the failing set c at granularity n (Zeller & Hildebrandt,
// 2002, algorithm ddmin): test each part, then each complement, then refine.
// Unresolved tests count as not failing.
func (s *searcher) ddmin(c []int, n int) []int {
	for {
		if len(c) <= 1 {
			return c
		}
		n = min(n, len(c))
		parts := split(c, n)
		reduced := false
		for _, d := range parts {
			if s.run(d) == Fail {
				c, n, reduced = d, 2, true
				break
			}
		}
		if !reduced && n > 2 {
			for _, d := range parts {
				comp := minus(c, d)
				if s.run(comp) == Fail {
					c, n, reduced = comp, max(n-1, 2), true
					break
				}
			}
		}
		if reduced {
			continue
		}
		if n >= len(c) {
			return c
		}
		n = min(len(c), 2*n)
	}
}

package golden

import (
	"fmt"
	"strings"

	"github.com/sergi/go-diff/diffmatchpatch"
)

// TextDiff returns a line diff of two golden files (or any texts): changed
// lines prefixed "-" and "+", with up to context unchanged lines around each
// change and "@@ line N" markers, at most maxLines lines (then a count of
// what was left out). Equal texts give "".
func TextDiff(oldName, newName, old, new string, context, maxLines int) string {
	if old == new {
		return ""
	}
	dmp := diffmatchpatch.New()
	a, b, lines := dmp.DiffLinesToChars(old, new)
	diffs := dmp.DiffCharsToLines(dmp.DiffMain(a, b, false), lines)
	type ln struct {
		op   diffmatchpatch.Operation
		text string
		at   int // line number in the old text (new text for inserts)
	}
	var all []ln
	oldAt, newAt := 1, 1
	for _, d := range diffs {
		for _, l := range strings.SplitAfter(d.Text, "\n") {
			if l == "" {
				continue
			}
			l = strings.TrimSuffix(l, "\n")
			switch d.Type {
			case diffmatchpatch.DiffEqual:
				all = append(all, ln{d.Type, l, oldAt})
				oldAt++
				newAt++
			case diffmatchpatch.DiffDelete:
				all = append(all, ln{d.Type, l, oldAt})
				oldAt++
			case diffmatchpatch.DiffInsert:
				all = append(all, ln{d.Type, l, newAt})
				newAt++
			}
		}
	}
	keep := make([]bool, len(all))
	for i, l := range all {
		if l.op != diffmatchpatch.DiffEqual {
			for j := max(0, i-context); j <= min(len(all)-1, i+context); j++ {
				keep[j] = true
			}
		}
	}
	var b2 strings.Builder
	fmt.Fprintf(&b2, "--- %s\n+++ %s\n", oldName, newName)
	out, dropped := 0, 0
	prev := -2
	for i, l := range all {
		if !keep[i] {
			continue
		}
		if out >= maxLines {
			dropped++
			continue
		}
		if i != prev+1 {
			fmt.Fprintf(&b2, "@@ line %d\n", l.at)
		}
		prev = i
		switch l.op {
		case diffmatchpatch.DiffEqual:
			b2.WriteString(" " + l.text + "\n")
		case diffmatchpatch.DiffDelete:
			b2.WriteString("-" + l.text + "\n")
		case diffmatchpatch.DiffInsert:
			b2.WriteString("+" + l.text + "\n")
		}
		out++
	}
	if dropped > 0 {
		fmt.Fprintf(&b2, "… %d more diff lines not shown\n", dropped)
	}
	return b2.String()
}

package reporters

import (
	"strings"

	"github.com/sergi/go-diff/diffmatchpatch"
)

// A diffLine is one line of a line-level text diff: op is ' ' (both), '-'
// (golden only) or '+' (candidate only).
type diffLine struct {
	op   byte
	text string
}

// textDiff compares golden and candidate text line by line with
// diffmatchpatch and returns the lines in unified-diff order. A last line
// without a newline, where the other text ends with one, is followed by a
// marker line so that the difference shows.
func textDiff(golden, candidate string) []diffLine {
	dmp := diffmatchpatch.New()
	// No deadline: a timed diff could give different results on a slower
	// machine; the texts are generated answers, short enough to diff exactly.
	dmp.DiffTimeout = 0
	a, b, lines := dmp.DiffLinesToChars(golden, candidate)
	diffs := dmp.DiffCharsToLines(dmp.DiffMain(a, b, false), lines)
	gNL := strings.HasSuffix(golden, "\n")
	cNL := strings.HasSuffix(candidate, "\n")
	var out []diffLine
	for _, d := range diffs {
		var op byte
		switch d.Type {
		case diffmatchpatch.DiffDelete:
			op = '-'
		case diffmatchpatch.DiffInsert:
			op = '+'
		default:
			op = ' '
		}
		text := d.Text
		for text != "" {
			line, rest, nl := strings.Cut(text, "\n")
			out = append(out, diffLine{op, line})
			text = rest
			if !nl && ((op == '-' && cNL) || (op == '+' && gNL) || (op == ' ' && gNL != cNL)) {
				out = append(out, diffLine{op, `\ no newline at end`})
			}
		}
	}
	return out
}

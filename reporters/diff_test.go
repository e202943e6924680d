package reporters

import (
	"fmt"
	"strings"
	"testing"

	"sparsegate/golden"
)

func TestDiffNothingDegraded(t *testing.T) {
	got := string(render(t, Diff{}, passingVerdict()))
	want := "no differences from golden: 2 probes, suite demo outcome pass\n"
	if got != want {
		t.Errorf("all-pass diff %q, want %q", got, want)
	}
}

func TestDiffBlocksOnlyForChangedProbes(t *testing.T) {
	got := string(render(t, Diff{}, failingVerdict()))
	var headers []string
	for _, l := range strings.Split(got, "\n") {
		if strings.HasPrefix(l, "--- probe ") {
			headers = append(headers, l)
		}
	}
	want := []string{
		"--- probe lookup-mc (choice): FAIL",
		"--- probe weather-gen (generation): FAIL",
		"--- probe heldout-ppl (perplexity): IMPROVED",
		"--- probe drift (drift): ERROR",
		"--- probe news-mc (choice): NEW",
	}
	if strings.Join(headers, "\n") != strings.Join(want, "\n") {
		t.Errorf("headers\n%s\nwant\n%s", strings.Join(headers, "\n"), strings.Join(want, "\n"))
	}
	for _, s := range []string{
		"  accuracy: 0.82 → 0.775 (delta -0.045, bound 0.02, p 0.0124): fail; 12 lost, 3 gained\n",
		"    lost q017 #17: chosen 2 → 0, margin 1.25 → 0.4\n",
		"    gained q042 #42: chosen 1 → 3, margin 0.3 → 0.8\n",
		"    moved w0003 #3: nll 812.5 → 790.25 (-22.25)\n",
		"      - Rain at first, clearing by noon.\n      + Heavy rain all day.\n        Winds light.\n",
		"      power: 48 items detect a drop of 0.09 at power 0.8; the tolerance is 0.02\n",
		`      + Fog in the \x1b[2Jharbour` + "\n",
	} {
		if !strings.Contains(got, s) {
			t.Errorf("diff lacks %q", s)
		}
	}
	if strings.Contains(got, "\x1b") {
		t.Error("escape character in a diff without colour")
	}
}

func TestDiffMaxItems(t *testing.T) {
	v := failingVerdict()
	p := v.Probes[0]
	p.Changes = nil
	for i := 0; i < 60; i++ {
		p.Changes = append(p.Changes, golden.ItemChange{ID: fmt.Sprintf("q%03d", i), Index: i, Change: golden.Lost,
			GoldenChosen: ip(1), CandidateChosen: ip(2)})
	}
	for _, tc := range []struct {
		max, shown int
	}{{0, 50}, {7, 7}, {60, 60}, {100, 60}} {
		got := string(render(t, Diff{MaxItems: tc.max}, v))
		if n := strings.Count(got, "    lost q"); n != tc.shown {
			t.Errorf("MaxItems %d: %d items shown, want %d", tc.max, n, tc.shown)
		}
		more := fmt.Sprintf("  … and %d more\n", 60-tc.shown)
		if has := strings.Contains(got, more); has != (tc.shown < 60) {
			t.Errorf("MaxItems %d: %q present %v", tc.max, more, has)
		}
	}
}

func TestDiffColor(t *testing.T) {
	got := string(render(t, Diff{Color: true}, failingVerdict()))
	for _, s := range []string{
		ansiRed + "    lost q017 #17",
		ansiGreen + "    gained q042 #42",
		ansiBold + ansiRed + "--- probe lookup-mc (choice): FAIL" + ansiReset,
		ansiBold + ansiGreen + "--- probe heldout-ppl (perplexity): IMPROVED" + ansiReset,
		ansiRed + "      - Rain at first",
		ansiGreen + "      + Heavy rain all day.",
	} {
		if !strings.Contains(got, s) {
			t.Errorf("coloured diff lacks %q", s)
		}
	}
	// Text from the verdict never brings its own escape sequences.
	if strings.Contains(got, "\x1b[2J") {
		t.Error("an escape sequence from generated text reached the terminal")
	}
	plain := strings.NewReplacer(ansiRed, "", ansiGreen, "", ansiBold, "", ansiReset, "").Replace(got)
	if plain != string(render(t, Diff{}, failingVerdict())) {
		t.Error("colour changes more than the escape sequences")
	}
}

func TestTextDiff(t *testing.T) {
	show := func(ls []diffLine) string {
		var b strings.Builder
		for _, l := range ls {
			b.WriteString(string(l.op) + l.text + "\n")
		}
		return b.String()
	}
	for _, tc := range []struct{ golden, candidate, want string }{
		{"a\nb\nc", "a\nB\nc", " a\n-b\n+B\n c\n"},
		{"same", "other", "-same\n+other\n"},
		{"", "new", "+new\n"},
		{"one\n", "one", "-one\n+one\n+\\ no newline at end\n"},
		{"x\ny\n", "x\ny\nz\n", " x\n y\n+z\n"},
	} {
		if got := show(textDiff(tc.golden, tc.candidate)); got != tc.want {
			t.Errorf("textDiff(%q, %q) =\n%s\nwant\n%s", tc.golden, tc.candidate, got, tc.want)
		}
	}
}

func TestVisible(t *testing.T) {
	for in, want := range map[string]string{
		"plain text, ü and ✓":     "plain text, ü and ✓",
		"tab\tand\nnewline kept":  "tab\tand\nnewline kept",
		"\x00\x01\x1b[31m\x7f":    `\x00\x01\x1b[31m\x7f`,
		"bad \xff\xfe utf-8":      `bad \xff\xfe utf-8`,
		"c1 \u0085 and \ufffe":    `c1 \x85 and \ufffe`,
		"cr\r\n":                  "cr\\x0d\n",
		"surrogate \xed\xa0\x80!": `surrogate \xed\xa0\x80!`,
	} {
		if got := visible(in); got != want {
			t.Errorf("visible(%q) = %q, want %q", in, got, want)
		}
	}
}

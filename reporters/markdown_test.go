package reporters

import (
	"regexp"
	"strconv"
	"strings"
	"testing"
	"unicode/utf8"
)

func TestMarkdownBoundedFor5000Probes(t *testing.T) {
	for _, nameLen := range []int{12, 2000} {
		v := bigVerdict(5000, nameLen)
		got := string(render(t, Markdown{}, v))
		if len(got) >= MarkdownLimit {
			t.Errorf("names of %d bytes: %d bytes, limit %d", nameLen, len(got), MarkdownLimit)
		}
		if !utf8.ValidString(got) {
			t.Error("output is not valid UTF-8 (a cut inside a rune?)")
		}
		m := regexp.MustCompile(`\n… (\d+) more probes\n`).FindStringSubmatch(got)
		if m == nil {
			t.Fatalf("names of %d bytes: no \"… N more probes\" line", nameLen)
		}
		rows := strings.Count(got, "| choice | fail |")
		if rows+atoi(t, m[1]) != 5000 {
			t.Errorf("%d rows + %s more = %d, want 5000", rows, m[1], rows+atoi(t, m[1]))
		}
		for _, s := range []string{"more failing entries\n", "more power warnings\n"} {
			if !strings.Contains(got, s) {
				t.Errorf("names of %d bytes: no %q line", nameLen, s)
			}
		}
		if !strings.HasSuffix(got, "\n"+Caution+"\n") {
			t.Error("the caution line is not last")
		}
	}
}

func atoi(t *testing.T, s string) int {
	t.Helper()
	n, err := strconv.Atoi(s)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

func TestMarkdownContent(t *testing.T) {
	got := string(render(t, Markdown{}, failingVerdict()))
	for _, s := range []string{
		"## sparsegate: FAIL, suite demo (error)\n",
		"| lookup-mc | choice | fail | accuracy | 0.82 → 0.775 | -0.045 |\n",
		"- lookup-mc: metric accuracy: golden 0.82, candidate 0.775, delta -0.045, tolerance abs 0.02, mcnemar α=0.05, fail if both, p 0.0124\n",
		"- weather-gen / exact\\_match: 48 items detect a drop of 0.09 at power 0.8; the tolerance is 0.02\n",
		"- drift: error: engine: layer 3 mask has 64 entries",
	} {
		if !strings.Contains(got, s) {
			t.Errorf("markdown lacks %q", s)
		}
	}
	if pass := string(render(t, Markdown{}, passingVerdict())); !strings.HasPrefix(pass, "## sparsegate: PASS") || strings.Contains(pass, "### Failing") {
		t.Errorf("all-pass summary:\n%s", pass)
	}
}

func TestMarkdownEscapesMarkup(t *testing.T) {
	v := passingVerdict()
	v.Probes[0].Name = "[click](https://example.invalid) <b>|x|</b> `code` *em*\n# heading\x1b"
	got := string(render(t, Markdown{}, v))
	row := ""
	for _, l := range strings.Split(got, "\n") {
		if strings.Contains(l, "click") {
			row = l
		}
	}
	want := "| \\[click\\](https:\\/\\/example.invalid) \\<b\\>\\|x\\|\\</b\\> \\`code\\` \\*em\\*\\\\n# heading\\\\x1b | choice |"
	if !strings.HasPrefix(row, want) {
		t.Errorf("row\n%s\nwant prefix\n%s", row, want)
	}
	if regexp.MustCompile(`[^\\]\]\(|[^\\]<b>|://`).MatchString(got) {
		t.Error("markup from a probe name survived")
	}
}

package golden

import (
	"fmt"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestTextDiffChangedLine(t *testing.T) {
	old := "a\nb\nc\nd\ne\n"
	got := TextDiff("old", "new", old, "a\nb\nX\nd\ne\n", 1, 100)
	require.Equal(t, "--- old\n+++ new\n@@ line 2\n b\n-c\n+X\n d\n", got)

	// No context: only the change.
	require.Equal(t, "--- old\n+++ new\n@@ line 3\n-c\n+X\n", TextDiff("old", "new", old, "a\nb\nX\nd\ne\n", 0, 100))

	// Two changes far apart are two hunks, each with its line.
	long := "1\n2\n3\n4\n5\n6\n7\n8\n9\n"
	got = TextDiff("o", "n", long, "1\nTWO\n3\n4\n5\n6\n7\nEIGHT\n9\n", 1, 100)
	require.Equal(t, "--- o\n+++ n\n@@ line 1\n 1\n-2\n+TWO\n 3\n@@ line 7\n 7\n-8\n+EIGHT\n 9\n", got)

	// Added and removed lines.
	require.Equal(t, "--- o\n+++ n\n@@ line 2\n 2\n+2.5\n 3\n", TextDiff("o", "n", "1\n2\n3\n4\n", "1\n2\n2.5\n3\n4\n", 1, 100))
	require.Equal(t, "--- /dev/null\n+++ n\n@@ line 1\n+x\n+y\n", TextDiff("/dev/null", "n", "", "x\ny\n", 1, 100))
}

func TestTextDiffEqual(t *testing.T) {
	require.Equal(t, "", TextDiff("o", "n", "same\n", "same\n", 3, 10))
	require.Equal(t, "", TextDiff("o", "n", "", "", 3, 10))
}

func TestTextDiffMaxLines(t *testing.T) {
	var a, b strings.Builder
	for i := range 20 {
		fmt.Fprintf(&a, "metric m%02d %d\n", i, i)
		fmt.Fprintf(&b, "metric m%02d %d\n", i, i+1)
	}
	full := TextDiff("o", "n", a.String(), b.String(), 0, 1000)
	require.Equal(t, 40, strings.Count(full, "\n")-3, "20 removed and 20 added lines")
	require.NotContains(t, full, "more diff lines")

	capped := TextDiff("o", "n", a.String(), b.String(), 0, 5)
	lines := strings.Split(strings.TrimSuffix(capped, "\n"), "\n")
	require.Equal(t, "… 35 more diff lines not shown", lines[len(lines)-1])
	body := 0
	for _, l := range lines {
		if strings.HasPrefix(l, "-") && !strings.HasPrefix(l, "---") || strings.HasPrefix(l, "+") && !strings.HasPrefix(l, "+++") {
			body++
		}
	}
	require.Equal(t, 5, body)
}

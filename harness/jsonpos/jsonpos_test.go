package jsonpos

import (
	"encoding/json"
	"errors"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestSyntaxErrorPointsAtTheOffendingByte(t *testing.T) {
	cases := []struct {
		text      string
		line, col int
	}{
		{`{"a": x}`, 1, 7},
		{"{\n  \"a\": 1,,\n}", 2, 10},
		{"{\n\n\"b\": tru }", 3, 9}, // the space after "tru" is the bad byte
	}
	for _, c := range cases {
		var v any
		err := json.Unmarshal([]byte(c.text), &v)
		var se *json.SyntaxError
		require.True(t, errors.As(err, &se), "%q: %v", c.text, err)
		l, col := OfSyntaxError([]byte(c.text), se)
		require.Equal(t, [2]int{c.line, c.col}, [2]int{l, col}, "%q", c.text)
	}
}

func TestLineColClamps(t *testing.T) {
	l, c := LineCol([]byte("ab\ncd"), 99)
	require.Equal(t, [2]int{2, 3}, [2]int{l, c})
	l, c = LineCol([]byte("ab"), -5)
	require.Equal(t, [2]int{1, 1}, [2]int{l, c})
}

func TestDuplicateKey(t *testing.T) {
	cases := []struct {
		in   string
		path string
		ok   bool
	}{
		{`{"a": 1, "b": 2}`, "", false},
		{`{"a": 1, "a": 2}`, "a", true},
		{`{"x": {"a": 1, "b": [1, {"c": 1, "c": 2}]}}`, "x.b.c", true},
		{`{"x": {"a": 1}, "y": {"a": 1}}`, "", false},
		{`{"x": [{"a": 1}, {"a": 2}]}`, "", false},
		{`{"x": {"a": 1, "a": 1}}`, "x.a", true},
		{`[1, 2`, "", false},
	}
	for _, c := range cases {
		p, off, ok := DuplicateKey([]byte(c.in))
		require.Equal(t, c.ok, ok, c.in)
		require.Equal(t, c.path, p, c.in)
		if ok {
			require.Equal(t, `"`+c.path[strings.LastIndexByte(c.path, '.')+1:]+`"`, c.in[off:off+int64(len(c.path)-strings.LastIndexByte(c.path, '.')+1)], c.in)
		}
	}
}

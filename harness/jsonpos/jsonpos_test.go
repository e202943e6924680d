package jsonpos

import (
	"encoding/json"
	"errors"
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

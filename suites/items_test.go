package suites

import (
	"bytes"
	"io"
	"strings"
	"testing"
	"testing/fstest"

	"github.com/stretchr/testify/require"
)

func readItemsString(t *testing.T, kind, data string) ([]Item, error) {
	t.Helper()
	return ReadItems(fstest.MapFS{"items.jsonl": {Data: []byte(data)}}, "items.jsonl", kind)
}

const goodChoice = `{"id":"a","context":"Q:","options":[" x"," y"],"answer":1}`

func TestReadItemsErrors(t *testing.T) {
	cases := []struct {
		name, kind, data, msg string
	}{
		{"malformed JSON", Choice, goodChoice + "\n" + `{"id":"b","context":"Q:",` + "\n", "items.jsonl:2: not valid JSON"},
		{"JSON syntax", Choice, `{"id": nope}`, "items.jsonl:1: not valid JSON at column 9"},
		{"answer out of range", Choice, `{"id":"a","context":"Q:","options":[" x"," y"],"answer":2}`, `items.jsonl:1: item "a": answer 2 is out of range; it indexes the 2 options from 0 to 1`},
		{"negative answer", Choice, `{"id":"a","context":"Q:","options":[" x"," y"],"answer":-1}`, "answer -1 is out of range"},
		{"no answer", Choice, `{"id":"a","context":"Q:","options":[" x"," y"]}`, `item "a" has no answer`},
		{"one option", Choice, `{"id":"a","context":"Q:","options":[" x"],"answer":0}`, "has 1 options; a choice item needs at least 2"},
		{"empty option", Choice, `{"id":"a","context":"Q:","options":[" x",""],"answer":0}`, "option 1 is empty"},
		{"unknown field", Choice, goodChoice + "\n\n" + `{"id":"b","context":"Q:","options":[" x"," y"],"answer":0,"label":1}`, `items.jsonl:3: unknown field "label"; item fields are id, context, options, answer, target`},
		{"wrong type", Choice, `{"id":"a","context":"Q:","options":[" x"," y"],"answer":"1"}`, `items.jsonl:1: field "answer" must be int, not a JSON string`},
		{"invalid UTF-8", Choice, goodChoice + "\n" + "{\"id\":\"b\xff\"}", "items.jsonl:2: byte 9 of the line is not valid UTF-8"},
		{"duplicate id", Choice, goodChoice + "\n" + goodChoice, `items.jsonl:2: id "a" was already used on line 1`},
		{"no id", Choice, `{"context":"Q:","options":[" x"," y"],"answer":0}`, "the item has no id"},
		{"empty context", Choice, `{"id":"a","context":"","options":[" x"," y"],"answer":0}`, `item "a" has an empty context`},
		{"two values", Choice, goodChoice + " {}", "more than one JSON value on the line"},
		{"not an object", Choice, `[1,2]`, "items.jsonl:1: "},
		{"no target", Generation, goodChoice, `item "a" has no target`},
		{"no items", Choice, "\n\n  \n", "items.jsonl: no items"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			items, err := readItemsString(t, c.kind, c.data)
			require.Error(t, err)
			require.Nil(t, items)
			require.Contains(t, err.Error(), c.msg)
		})
	}
	_, err := ReadItems(fstest.MapFS{}, "gone.jsonl", Choice)
	require.ErrorContains(t, err, "gone.jsonl")
}

func TestReadItems(t *testing.T) {
	data := "\n" + goodChoice + "\r\n\n   \n" + `{"id":"b","context":"R:","options":[" p"," q"," r"],"answer":0,"target":" p"}` // no final newline
	items, err := readItemsString(t, Choice, data)
	require.NoError(t, err)
	require.Len(t, items, 2)
	require.Equal(t, "a", items[0].ID)
	require.Equal(t, 2, items[0].Line, "blank lines are skipped but counted")
	require.Equal(t, 1, *items[0].Answer)
	require.Equal(t, "Q: y", items[0].Solved(), "without a target the right option solves the item")
	require.Equal(t, 5, items[1].Line)
	require.Equal(t, "R: p", items[1].Solved())

	gen, err := readItemsString(t, Generation, `{"id":"g","context":"C:","target":" t"}`)
	require.NoError(t, err)
	require.Equal(t, "C: t", gen[0].Solved())
	require.Nil(t, gen[0].Answer)
}

// countingReader counts the bytes read and fails the test if the reader is
// asked for far more than one line's worth beyond MaxItemLine.
type countingReader struct {
	r io.Reader
	n int
}

func (c *countingReader) Read(p []byte) (int, error) {
	n, err := c.r.Read(p)
	c.n += n
	return n, err
}

func TestReadItemsLongLine(t *testing.T) {
	long := `{"id":"a","context":"` + strings.Repeat("x", 2<<20) + `","options":[" x"," y"],"answer":0}`
	data := goodChoice + "\n" + long + "\n"
	cr := &countingReader{r: strings.NewReader(data)}
	_, err := parseItems("items.jsonl", cr, Choice)
	require.Error(t, err)
	require.Contains(t, err.Error(), "items.jsonl:2: the line is longer than 1048576 bytes")
	// The reader stops soon after the cap instead of reading the whole line.
	require.Less(t, cr.n, MaxItemLine+(128<<10), "read %d bytes of a %d-byte input", cr.n, len(data))

	// A line of exactly MaxItemLine bytes (with its newline) is accepted.
	pad := MaxItemLine - len(`{"id":"b","context":"","options":[" x"," y"],"answer":0}`) - 1
	exact := `{"id":"b","context":"` + strings.Repeat("y", pad) + `","options":[" x"," y"],"answer":0}` + "\n"
	require.Len(t, exact, MaxItemLine)
	items, err := parseItems("items.jsonl", bytes.NewReader([]byte(exact)), Choice)
	require.NoError(t, err)
	require.Len(t, items, 1)
}

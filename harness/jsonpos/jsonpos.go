// Package jsonpos turns the byte offsets that encoding/json reports into the
// line and column a person finds in an editor, so messages about JSON files
// read file:line:col.
package jsonpos

import (
	"bytes"
	"encoding/json"
	"strings"
)

// LineCol returns the 1-based line and column of the byte at index off
// (clamped to the data; columns count bytes).
func LineCol(data []byte, off int64) (line, col int) {
	off = max(0, min(off, int64(len(data))))
	line, col = 1, 1
	for _, c := range data[:off] {
		if c == '\n' {
			line++
			col = 1
		} else {
			col++
		}
	}
	return line, col
}

// OfSyntaxError returns the position of the byte a json.SyntaxError stopped
// at: its Offset counts the bytes read, the offending one included.
func OfSyntaxError(data []byte, err *json.SyntaxError) (line, col int) {
	return LineCol(data, err.Offset-1)
}

// DuplicateKey finds the first object key that appears twice in the same
// JSON object (encoding/json silently keeps the last one) and returns its
// path (keys joined by '.') and the byte offset of the repeat. Invalid JSON
// returns ok false: the caller's decoder reports that.
func DuplicateKey(data []byte) (path string, off int64, ok bool) {
	dec := json.NewDecoder(bytes.NewReader(data))
	type frame struct {
		object bool
		keys   map[string]bool
		name   string
		expect bool // the next token in an object is a key
	}
	var stack []*frame
	var names []string
	for {
		before := dec.InputOffset()
		tok, err := dec.Token()
		if err != nil {
			return "", 0, false
		}
		var top *frame
		if len(stack) > 0 {
			top = stack[len(stack)-1]
		}
		if top != nil && top.object && top.expect {
			if d, isDelim := tok.(json.Delim); isDelim && d == '}' {
				stack = stack[:len(stack)-1]
				names = names[:len(names)-1]
				if len(stack) > 0 && stack[len(stack)-1].object {
					stack[len(stack)-1].expect = true
				}
				continue
			}
			k, _ := tok.(string)
			if top.keys[k] {
				var parts []string
				for _, n := range names {
					if n != "" {
						parts = append(parts, n)
					}
				}
				for before < int64(len(data)) && strings.IndexByte(" \t\r\n,", data[before]) >= 0 {
					before++ // point at the key itself
				}
				return strings.Join(append(parts, k), "."), before, true
			}
			top.keys[k] = true
			top.name = k
			top.expect = false
			continue
		}
		switch d := tok.(type) {
		case json.Delim:
			switch d {
			case '{', '[':
				name := ""
				if top != nil && top.object {
					name = top.name
				}
				stack = append(stack, &frame{object: d == '{', keys: map[string]bool{}, expect: d == '{'})
				names = append(names, name)
				continue
			case '}', ']':
				stack = stack[:len(stack)-1]
				names = names[:len(names)-1]
			}
		}
		if len(stack) == 0 {
			return "", 0, false
		}
		if t := stack[len(stack)-1]; t.object {
			t.expect = true
		}
	}
}

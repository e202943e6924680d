// Package jsonpos turns the byte offsets that encoding/json reports into the
// line and column a person finds in an editor, so messages about JSON files
// read file:line:col.
package jsonpos

import "encoding/json"

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

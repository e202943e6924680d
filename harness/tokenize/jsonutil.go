package tokenize

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"

	"sparsegate/harness/jsonpos"
)

// isNull reports whether a raw JSON value is absent or null.
func isNull(raw json.RawMessage) bool {
	raw = bytes.TrimSpace(raw)
	return len(raw) == 0 || bytes.Equal(raw, []byte("null"))
}

// jsonErr turns a decoding error of a whole file into a message naming the
// file and the place.
func jsonErr(file string, data []byte, err error) error {
	var se *json.SyntaxError
	var te *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se) && strings.Contains(se.Error(), "unexpected end of JSON input"):
		return errAt(file, fmt.Sprintf("byte offset %d", se.Offset), "JSON ends early (%v); the file is truncated: re-export it", se)
	case errors.As(err, &se):
		l, c := jsonpos.OfSyntaxError(data, se)
		return errAt(file, fmt.Sprintf("line %d, column %d (byte offset %d)", l, c, se.Offset), "invalid JSON: %v; fix the syntax or re-export the file", se)
	case errors.As(err, &te):
		l, c := jsonpos.LineCol(data, te.Offset)
		field := te.Field
		if field == "" {
			field = "(top level)"
		}
		return errAt(file, fmt.Sprintf("field %s (line %d, column %d)", field, l, c), "expected %s, found JSON %s; fix the value", te.Type, te.Value)
	case errors.Is(err, io.ErrUnexpectedEOF), errors.Is(err, io.EOF):
		return errAt(file, fmt.Sprintf("byte offset %d", len(data)), "JSON ends early; the file is truncated: re-export it")
	default:
		return errAt(file, "(top level)", "cannot decode JSON: %v; fix the file", err)
	}
}

// readVocabObject reads a JSON object of token → id in file order, rejecting
// duplicate tokens, duplicate ids, negative or non-integer ids and ids that
// are not exactly 0..n-1. field names the object's place for messages.
func readVocabObject(file, field string, raw json.RawMessage) ([]string, error) {
	dec := json.NewDecoder(bytes.NewReader(raw))
	dec.UseNumber()
	tok, err := dec.Token()
	if err != nil || tok != json.Delim('{') {
		return nil, errAt(file, "field "+field, "expected a JSON object of token → id; fix the file")
	}
	byToken := make(map[string]int)
	var byID []string
	have := make(map[int]string)
	maxID := -1
	for dec.More() {
		kt, err := dec.Token()
		if err != nil {
			return nil, errAt(file, "field "+field, "invalid JSON near byte offset %d: %v; fix the file", dec.InputOffset(), err)
		}
		key := kt.(string)
		vt, err := dec.Token()
		if err != nil {
			return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, key), "invalid JSON: %v; fix the file", err)
		}
		num, ok := vt.(json.Number)
		if !ok {
			return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, key), "the id is %v, not a number; ids must be integers 0..n-1", vt)
		}
		id, err := strconv.Atoi(num.String())
		if err != nil || id < 0 {
			return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, key), "id %s is not a non-negative integer; ids must be integers 0..n-1", num)
		}
		if key == "" {
			return nil, errAt(file, fmt.Sprintf("field %s, id %d", field, id), "empty token string; remove the entry")
		}
		if prev, dup := byToken[key]; dup {
			return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, key), "token listed twice (ids %d and %d); keep one entry", prev, id)
		}
		if other, dup := have[id]; dup {
			return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, key), "duplicate id %d (also token %q); every id must belong to one token", id, other)
		}
		byToken[key] = id
		have[id] = key
		if id > maxID {
			maxID = id
		}
	}
	if _, err := dec.Token(); err != nil {
		return nil, errAt(file, "field "+field, "invalid JSON at the end of the object: %v; fix the file", err)
	}
	if maxID >= len(have) {
		missing := 0
		for have[missing] != "" {
			missing++
		}
		return nil, errAt(file, fmt.Sprintf("field %s, token %q", field, have[maxID]),
			"id %d is out of range: ids must be contiguous 0..%d, and id %d is missing; renumber the vocabulary", maxID, len(have)-1, missing)
	}
	byID = make([]string, len(have))
	for id, key := range have {
		byID[id] = key
	}
	return byID, nil
}

package suites

import (
	"bufio"
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"strings"
)

// MaxItemLine caps one JSON Lines line: an item is a prompt, not a corpus.
const MaxItemLine = 1 << 20

// An Item is one line of a choice or generation data file.
//
//	{"id": "lookup-0001", "context": "Depot table: ...\nCode for Saltquay:",
//	 "options": [" UCI", " MMD", " GMM", " ZHH"], "answer": 0, "target": " UCI"}
//
// A choice item needs options and answer (the 0-based index of the right
// option); a generation item needs target (the reference continuation). An
// item may carry both, so one file serves both kinds.
type Item struct {
	// ID names the item; unique within its file.
	ID string `json:"id"`
	// Context is the prompt the options or the generation continue.
	Context string `json:"context"`
	// Options are the choices (choice items).
	Options []string `json:"options,omitempty"`
	// Answer indexes the right option (choice items).
	Answer *int `json:"answer,omitempty"`
	// Target is the reference continuation (generation items; also the
	// solved answer shown in few-shot examples).
	Target string `json:"target,omitempty"`
	// Line is the item's line in its file.
	Line int `json:"-"`
}

// Solved returns the item as a solved few-shot example: its context followed
// by its target, or by its right option when it has no target.
func (it *Item) Solved() string {
	if it.Target != "" {
		return it.Context + it.Target
	}
	if it.Answer != nil && *it.Answer >= 0 && *it.Answer < len(it.Options) {
		return it.Context + it.Options[*it.Answer]
	}
	return it.Context
}

// ReadItems reads a JSON Lines file of items for a probe of the given kind
// (Choice or Generation) from fsys. Blank lines are skipped; every other line
// must be one item. Errors name the file and line.
func ReadItems(fsys fs.FS, file, kind string) ([]Item, error) {
	f, err := fsys.Open(file)
	if err != nil {
		return nil, fmt.Errorf("reading items: %w", err)
	}
	defer f.Close()
	return parseItems(file, f, kind)
}

func parseItems(file string, r io.Reader, kind string) ([]Item, error) {
	br := bufio.NewReaderSize(r, 64<<10)
	var items []Item
	ids := map[string]int{}
	for line := 1; ; line++ {
		b, err := readLine(br)
		if errors.Is(err, io.EOF) && b == nil {
			break
		}
		if errors.Is(err, errLongLine) {
			return nil, fmt.Errorf("%s:%d: the line is longer than %d bytes; an item is one short JSON object per line", file, line, MaxItemLine)
		}
		if err != nil && !errors.Is(err, io.EOF) {
			return nil, fmt.Errorf("%s:%d: %w", file, line, err)
		}
		b = bytes.TrimRight(b, "\r\n")
		if len(bytes.TrimSpace(b)) > 0 {
			it, err := parseItem(b, kind)
			if err != nil {
				return nil, fmt.Errorf("%s:%d: %w", file, line, err)
			}
			if first, dup := ids[it.ID]; dup {
				return nil, fmt.Errorf("%s:%d: id %q was already used on line %d; give every item its own id", file, line, it.ID, first)
			}
			ids[it.ID] = line
			it.Line = line
			items = append(items, it)
		}
		if errors.Is(err, io.EOF) {
			break
		}
	}
	if len(items) == 0 {
		return nil, fmt.Errorf("%s: no items; write one JSON object per line", file)
	}
	return items, nil
}

var errLongLine = errors.New("line too long")

// readLine returns the next line (with its newline) without ever holding more
// than MaxItemLine bytes of it.
func readLine(br *bufio.Reader) ([]byte, error) {
	var buf []byte
	for {
		chunk, err := br.ReadSlice('\n')
		if len(buf)+len(chunk) > MaxItemLine {
			return nil, errLongLine
		}
		buf = append(buf, chunk...)
		if errors.Is(err, bufio.ErrBufferFull) {
			continue
		}
		if err != nil {
			if len(buf) == 0 {
				return nil, err
			}
			return buf, err
		}
		return buf, nil
	}
}

func parseItem(b []byte, kind string) (Item, error) {
	var it Item
	if !utf8Valid(b) {
		return it, fmt.Errorf("byte %d of the line is not valid UTF-8; save the file as UTF-8", InvalidUTF8At(b)+1)
	}
	dec := json.NewDecoder(bytes.NewReader(b))
	dec.DisallowUnknownFields()
	if err := dec.Decode(&it); err != nil {
		var se *json.SyntaxError
		var te *json.UnmarshalTypeError
		switch {
		case errors.As(err, &se):
			return it, fmt.Errorf("not valid JSON at column %d: %v; each line must be one JSON object", se.Offset, se)
		case errors.As(err, &te):
			return it, fmt.Errorf("field %q must be %s, not a JSON %s", te.Field, te.Type, te.Value)
		case errors.Is(err, io.ErrUnexpectedEOF):
			return it, fmt.Errorf("not valid JSON: the object ends before its closing brace; each line must be one complete JSON object")
		case strings.HasPrefix(err.Error(), "json: unknown field"):
			return it, fmt.Errorf("%s; item fields are id, context, options, answer, target", strings.TrimPrefix(err.Error(), "json: "))
		}
		return it, fmt.Errorf("not a JSON object: %v", err)
	}
	if dec.More() {
		return it, fmt.Errorf("more than one JSON value on the line; write one item per line")
	}
	if it.ID == "" {
		return it, fmt.Errorf("the item has no id; add \"id\": \"...\"")
	}
	if it.Context == "" {
		return it, fmt.Errorf("item %q has an empty context", it.ID)
	}
	switch kind {
	case Choice:
		if len(it.Options) < 2 {
			return it, fmt.Errorf("item %q has %d options; a choice item needs at least 2", it.ID, len(it.Options))
		}
		for i, o := range it.Options {
			if o == "" {
				return it, fmt.Errorf("item %q: option %d is empty", it.ID, i)
			}
		}
		if it.Answer == nil {
			return it, fmt.Errorf("item %q has no answer; add \"answer\": the 0-based index of the right option", it.ID)
		}
		if *it.Answer < 0 || *it.Answer >= len(it.Options) {
			return it, fmt.Errorf("item %q: answer %d is out of range; it indexes the %d options from 0 to %d", it.ID, *it.Answer, len(it.Options), len(it.Options)-1)
		}
	case Generation:
		if it.Target == "" {
			return it, fmt.Errorf("item %q has no target; a generation item needs \"target\", the reference continuation", it.ID)
		}
	}
	return it, nil
}

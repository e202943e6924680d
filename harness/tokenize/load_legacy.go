package tokenize

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"strings"
)

// readVocabMerges reads the two-file layout: vocab.json (token → id) and
// merges.txt (one "a b" merge a line, ranked by line; a first line starting
// with "#version" and blank lines are skipped).
func readVocabMerges(vocabPath, mergesPath string) (*loadSpec, error) {
	vdata, err := os.ReadFile(vocabPath)
	if err != nil {
		return nil, fmt.Errorf("tokenize: read %s (needed beside %s): %w", vocabPath, mergesPath, err)
	}
	if !json.Valid(vdata) {
		var v any
		return nil, jsonErr(vocabPath, vdata, json.Unmarshal(vdata, &v))
	}
	vocab, err := readVocabObject(vocabPath, "(top level)", vdata)
	if err != nil {
		return nil, err
	}
	mdata, err := os.ReadFile(mergesPath)
	if err != nil {
		return nil, fmt.Errorf("tokenize: read %s (needed beside %s): %w", mergesPath, vocabPath, err)
	}
	spec := &loadSpec{vocabFile: vocabPath, vocab: vocab, mergesFile: mergesPath, useRegex: true}
	sc := bufio.NewScanner(bytes.NewReader(mdata))
	sc.Buffer(make([]byte, 0, 64*1024), len(mdata)+1)
	line := 0
	for sc.Scan() {
		line++
		text := strings.TrimSuffix(sc.Text(), "\r")
		if (line == 1 && strings.HasPrefix(text, "#version")) || strings.TrimSpace(text) == "" {
			continue
		}
		a, b, ok := splitMergeLine(text)
		if !ok {
			return nil, errAt(mergesPath, fmt.Sprintf("line %d", line), "%q is not two symbols separated by one space; fix the line", text)
		}
		spec.merges = append(spec.merges, mergeSpec{a: a, b: b, place: fmt.Sprintf("line %d", line)})
	}
	if err := sc.Err(); err != nil {
		return nil, fmt.Errorf("tokenize: read %s: %w", mergesPath, err)
	}
	return spec, nil
}

// splitMergeLine splits "a b" into its two non-empty symbols.
func splitMergeLine(s string) (string, string, bool) {
	a, b, ok := strings.Cut(s, " ")
	if !ok || a == "" || b == "" || strings.Contains(b, " ") {
		return "", "", false
	}
	return a, b, true
}

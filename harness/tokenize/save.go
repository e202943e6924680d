package tokenize

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/atomicfile"
)

// Save writes tokenizer.json and tokenizer_config.json into dir (created if
// missing), each atomically (temp file, fsync, rename). The add rules are
// written as a TemplateProcessing post-processor (ByteLevel when nothing is
// added), so LoadDir(dir) encodes exactly as t does.
func (t *Tokenizer) Save(dir string) error {
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return fmt.Errorf("tokenize: Save: %w", err)
	}
	if err := writeAtomic(filepath.Join(dir, fileTokenizerJSON), t.tokenizerJSON()); err != nil {
		return err
	}
	cfg, err := t.configJSON()
	if err != nil {
		return err
	}
	if err := writeAtomic(filepath.Join(dir, fileTokenizerConfig), cfg); err != nil {
		return err
	}
	return nil
}

// jstr renders a JSON string.
func jstr(s string) string {
	b, _ := json.Marshal(s) // a string always marshals
	return string(b)
}

// tokenizerJSON renders the single-file layout with a stable key order.
func (t *Tokenizer) tokenizerJSON() []byte {
	var b bytes.Buffer
	b.WriteString("{\n  \"version\": \"1.0\",\n  \"truncation\": null,\n  \"padding\": null,\n  \"added_tokens\": [")
	for i, a := range t.added {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "\n    {\"id\": %d, \"content\": %s, \"single_word\": false, \"lstrip\": false, \"rstrip\": false, \"normalized\": false, \"special\": %t}",
			a.id, jstr(a.content), a.special)
	}
	b.WriteString("\n  ],\n  \"normalizer\": null,\n")
	fmt.Fprintf(&b, "  \"pre_tokenizer\": {\"type\": \"ByteLevel\", \"add_prefix_space\": %t, \"trim_offsets\": true, \"use_regex\": %t},\n", t.addPrefixSpace, t.useRegex)
	b.WriteString("  \"post_processor\": ")
	t.writePostProcessor(&b)
	b.WriteString(",\n  \"decoder\": {\"type\": \"ByteLevel\", \"add_prefix_space\": true, \"trim_offsets\": true, \"use_regex\": true},\n")
	fmt.Fprintf(&b, "  \"model\": {\n    \"type\": \"BPE\",\n    \"dropout\": null,\n    \"unk_token\": null,\n    \"continuing_subword_prefix\": null,\n    \"end_of_word_suffix\": null,\n    \"fuse_unk\": false,\n    \"byte_fallback\": false,\n    \"ignore_merges\": %t,\n    \"vocab\": {", t.ignoreMerges)
	first := true
	for id, s := range t.vocab {
		if s == "" {
			continue
		}
		if !first {
			b.WriteByte(',')
		}
		first = false
		fmt.Fprintf(&b, "\n      %s: %d", jstr(s), id)
	}
	b.WriteString("\n    },\n    \"merges\": [")
	for i, m := range t.merges {
		if i > 0 {
			b.WriteByte(',')
		}
		fmt.Fprintf(&b, "\n      [%s, %s]", jstr(t.vocab[m[0]]), jstr(t.vocab[m[1]]))
	}
	b.WriteString("\n    ]\n  }\n}\n")
	return b.Bytes()
}

func (t *Tokenizer) writePostProcessor(b *bytes.Buffer) {
	if len(t.prefix) == 0 && len(t.suffix) == 0 {
		b.WriteString("{\"type\": \"ByteLevel\", \"add_prefix_space\": true, \"trim_offsets\": false, \"use_regex\": true}")
		return
	}
	item := func(id int, typeID int) string {
		return fmt.Sprintf("{\"SpecialToken\": {\"id\": %s, \"type_id\": %d}}", jstr(t.tokenLabel(id)), typeID)
	}
	var single, pair []string
	for _, id := range t.prefix {
		single = append(single, item(id, 0))
		pair = append(pair, item(id, 0))
	}
	single = append(single, "{\"Sequence\": {\"id\": \"A\", \"type_id\": 0}}")
	pair = append(pair, "{\"Sequence\": {\"id\": \"A\", \"type_id\": 0}}")
	for _, id := range t.suffix {
		single = append(single, item(id, 0))
		pair = append(pair, item(id, 0))
	}
	for _, id := range t.prefix {
		pair = append(pair, item(id, 1))
	}
	pair = append(pair, "{\"Sequence\": {\"id\": \"B\", \"type_id\": 1}}")
	for _, id := range t.suffix {
		pair = append(pair, item(id, 1))
	}
	b.WriteString("{\n    \"type\": \"TemplateProcessing\",\n    \"single\": [")
	writeList(b, single)
	b.WriteString("],\n    \"pair\": [")
	writeList(b, pair)
	b.WriteString("],\n    \"special_tokens\": {")
	done := map[int]bool{}
	first := true
	for _, id := range append(append([]int(nil), t.prefix...), t.suffix...) {
		if done[id] {
			continue
		}
		done[id] = true
		if !first {
			b.WriteByte(',')
		}
		first = false
		name := jstr(t.tokenLabel(id))
		fmt.Fprintf(b, "\n      %s: {\"id\": %s, \"ids\": [%d], \"tokens\": [%s]}", name, name, id, name)
	}
	b.WriteString("\n    }\n  }")
}

func writeList(b *bytes.Buffer, items []string) {
	for i, s := range items {
		if i > 0 {
			b.WriteString(", ")
		}
		b.WriteString(s)
	}
}

// configJSON renders tokenizer_config.json: the special-token names and the
// add rules (add_bos_token/add_eos_token state what the post-processor in
// tokenizer.json does, which governs on load).
func (t *Tokenizer) configJSON() ([]byte, error) {
	m := map[string]any{}
	name := func(key string, id int) {
		if id >= 0 {
			m[key] = t.tokenLabel(id)
		}
	}
	name("bos_token", t.bos)
	name("eos_token", t.eos)
	name("pad_token", t.pad)
	name("unk_token", t.unk)
	if len(t.prefix) == 0 || (len(t.prefix) == 1 && t.prefix[0] == t.bos) {
		m["add_bos_token"] = len(t.prefix) == 1
	}
	if len(t.suffix) == 0 || (len(t.suffix) == 1 && t.suffix[0] == t.eos) {
		m["add_eos_token"] = len(t.suffix) == 1
	}
	b, err := json.MarshalIndent(m, "", "  ") // map keys are sorted: stable output
	if err != nil {
		return nil, fmt.Errorf("tokenize: Save: render %s: %w", fileTokenizerConfig, err)
	}
	return append(b, '\n'), nil
}

// writeAtomic writes data to path through atomicfile (temp file, fsync,
// rename, directory fsync).
func writeAtomic(path string, data []byte) error {
	if err := atomicfile.WriteFile(path, data); err != nil {
		return fmt.Errorf("tokenize: Save: %w", err)
	}
	return nil
}

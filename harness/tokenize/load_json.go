package tokenize

import (
	"encoding/json"
	"fmt"
	"os"
)

type addedTokenJSON struct {
	ID      *int   `json:"id"`
	Content string `json:"content"`
	Special bool   `json:"special"`
}

type tokenizerJSON struct {
	AddedTokens   []addedTokenJSON `json:"added_tokens"`
	Normalizer    json.RawMessage  `json:"normalizer"`
	PreTokenizer  json.RawMessage  `json:"pre_tokenizer"`
	PostProcessor json.RawMessage  `json:"post_processor"`
	Decoder       json.RawMessage  `json:"decoder"`
	Model         json.RawMessage  `json:"model"`
}

type bpeModelJSON struct {
	Type                    *string           `json:"type"`
	Vocab                   json.RawMessage   `json:"vocab"`
	Merges                  []json.RawMessage `json:"merges"`
	Dropout                 *float64          `json:"dropout"`
	ContinuingSubwordPrefix *string           `json:"continuing_subword_prefix"`
	EndOfWordSuffix         *string           `json:"end_of_word_suffix"`
	IgnoreMerges            bool              `json:"ignore_merges"`
}

// typed is any tokenizer.json component: its "type" plus the rest.
type typed struct {
	Type string `json:"type"`
}

// readTokenizerJSON reads the single-file layout.
func readTokenizerJSON(path string) (*loadSpec, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("tokenize: read %s: %w", path, err)
	}
	var tj tokenizerJSON
	if err := json.Unmarshal(data, &tj); err != nil {
		return nil, jsonErr(path, data, err)
	}
	spec := &loadSpec{vocabFile: path, mergesFile: path, useRegex: true}
	if err := readModel(path, tj.Model, spec); err != nil {
		return nil, err
	}
	ids := make(map[int]string)
	for i, a := range tj.AddedTokens {
		place := fmt.Sprintf("field added_tokens[%d]", i)
		if a.ID == nil || *a.ID < 0 {
			return nil, errAt(path, place, "token %q has no valid \"id\"; give it a non-negative integer id", a.Content)
		}
		if a.Content == "" {
			return nil, errAt(path, place, "id %d has an empty \"content\"; remove the entry or give its text", *a.ID)
		}
		if prev, dup := ids[*a.ID]; dup {
			return nil, errAt(path, place, "duplicate id %d (also token %q); every id must belong to one token", *a.ID, prev)
		}
		ids[*a.ID] = a.Content
		spec.added = append(spec.added, addedToken{id: *a.ID, content: a.Content, special: a.Special})
	}
	if !isNull(tj.Normalizer) {
		var n typed
		_ = json.Unmarshal(tj.Normalizer, &n)
		return nil, errAt(path, "field normalizer", "type %q is not supported (only null); byte-level BPE here takes the text as is", n.Type)
	}
	if err := readPreTokenizer(path, tj.PreTokenizer, spec); err != nil {
		return nil, err
	}
	if err := readPostProcessor(path, tj.PostProcessor, spec); err != nil {
		return nil, err
	}
	if !isNull(tj.Decoder) {
		var d typed
		if err := json.Unmarshal(tj.Decoder, &d); err != nil || d.Type != "ByteLevel" {
			return nil, errAt(path, "field decoder", "type %q is not supported; use {\"type\": \"ByteLevel\"} or null", d.Type)
		}
	}
	return spec, nil
}

func readModel(path string, raw json.RawMessage, spec *loadSpec) error {
	if isNull(raw) {
		return errAt(path, "field model", "missing; a tokenizer.json needs a \"model\" of type \"BPE\"")
	}
	var m bpeModelJSON
	if err := json.Unmarshal(raw, &m); err != nil {
		return errAt(path, "field model", "cannot decode: %v; fix the file", err)
	}
	switch {
	case m.Type != nil && *m.Type != "BPE":
		return errAt(path, "field model.type", "%q is not supported; only \"BPE\" (byte-level) models load here", *m.Type)
	case m.Type == nil && m.Merges == nil:
		return errAt(path, "field model.type", "missing and the model has no merges; only \"BPE\" (byte-level) models load here")
	case m.Dropout != nil && *m.Dropout != 0:
		return errAt(path, "field model.dropout", "%v is not supported; set it to null", *m.Dropout)
	case m.ContinuingSubwordPrefix != nil && *m.ContinuingSubwordPrefix != "":
		return errAt(path, "field model.continuing_subword_prefix", "%q is not supported by byte-level BPE; set it to null", *m.ContinuingSubwordPrefix)
	case m.EndOfWordSuffix != nil && *m.EndOfWordSuffix != "":
		return errAt(path, "field model.end_of_word_suffix", "%q is not supported by byte-level BPE; set it to null", *m.EndOfWordSuffix)
	}
	if isNull(m.Vocab) {
		return errAt(path, "field model.vocab", "missing; the BPE model needs its vocabulary")
	}
	vocab, err := readVocabObject(path, "model.vocab", m.Vocab)
	if err != nil {
		return err
	}
	spec.vocab = vocab
	spec.ignoreMerges = m.IgnoreMerges
	for i, r := range m.Merges {
		place := fmt.Sprintf("field model.merges[%d]", i)
		var s string
		var pair []string
		if json.Unmarshal(r, &s) == nil {
			a, b, ok := splitMergeLine(s)
			if !ok {
				return errAt(path, place, "%q is not two symbols separated by one space; write \"a b\" or [\"a\", \"b\"]", s)
			}
			spec.merges = append(spec.merges, mergeSpec{a: a, b: b, place: place})
			continue
		}
		if json.Unmarshal(r, &pair) != nil || len(pair) != 2 || pair[0] == "" || pair[1] == "" {
			return errAt(path, place, "%s is neither \"a b\" nor a pair [\"a\", \"b\"] of non-empty symbols; fix the entry", string(r))
		}
		spec.merges = append(spec.merges, mergeSpec{a: pair[0], b: pair[1], place: place})
	}
	return nil
}

type byteLevelJSON struct {
	Type           string `json:"type"`
	AddPrefixSpace bool   `json:"add_prefix_space"`
	UseRegex       *bool  `json:"use_regex"`
}

func readPreTokenizer(path string, raw json.RawMessage, spec *loadSpec) error {
	const fix = "only ByteLevel (alone or as the single member of a Sequence) is supported"
	if isNull(raw) {
		return errAt(path, "field pre_tokenizer", "missing or null; %s", fix)
	}
	var p struct {
		byteLevelJSON
		PreTokenizers []json.RawMessage `json:"pretokenizers"`
	}
	if err := json.Unmarshal(raw, &p); err != nil {
		return errAt(path, "field pre_tokenizer", "cannot decode: %v; %s", err, fix)
	}
	field := "pre_tokenizer"
	if p.Type == "Sequence" {
		if len(p.PreTokenizers) != 1 {
			return errAt(path, "field pre_tokenizer.pretokenizers", "has %d members; %s", len(p.PreTokenizers), fix)
		}
		field = "pre_tokenizer.pretokenizers[0]"
		p.byteLevelJSON = byteLevelJSON{}
		if err := json.Unmarshal(p.PreTokenizers[0], &p.byteLevelJSON); err != nil {
			return errAt(path, "field "+field, "cannot decode: %v; %s", err, fix)
		}
	}
	if p.Type != "ByteLevel" {
		return errAt(path, "field "+field+".type", "%q is not supported; %s", p.Type, fix)
	}
	spec.addPrefixSpace = p.AddPrefixSpace
	spec.useRegex = p.UseRegex == nil || *p.UseRegex
	return nil
}

type templateJSON struct {
	Type          string            `json:"type"`
	Single        []json.RawMessage `json:"single"`
	SpecialTokens map[string]struct {
		ID  string `json:"id"`
		IDs []int  `json:"ids"`
	} `json:"special_tokens"`
	Processors []json.RawMessage `json:"processors"`
}

func readPostProcessor(path string, raw json.RawMessage, spec *loadSpec) error {
	if isNull(raw) {
		return nil
	}
	spec.hasPostProcessor = true
	var top templateJSON
	if err := json.Unmarshal(raw, &top); err != nil {
		return errAt(path, "field post_processor", "cannot decode: %v; fix the file", err)
	}
	procs := []json.RawMessage{raw}
	field := "post_processor"
	if top.Type == "Sequence" {
		procs = top.Processors
	}
	seenTemplate := false
	for i, pr := range procs {
		if top.Type == "Sequence" {
			field = fmt.Sprintf("post_processor.processors[%d]", i)
		}
		var p templateJSON
		if err := json.Unmarshal(pr, &p); err != nil {
			return errAt(path, "field "+field, "cannot decode: %v; fix the file", err)
		}
		switch p.Type {
		case "ByteLevel":
		case "TemplateProcessing":
			if seenTemplate {
				return errAt(path, "field "+field, "a second TemplateProcessing; keep one")
			}
			seenTemplate = true
			if err := readTemplate(path, field, &p, spec); err != nil {
				return err
			}
		case "RobertaProcessing", "BertProcessing":
			return errAt(path, "field "+field+".type", "%q is not supported; express the same tokens as a TemplateProcessing post-processor", p.Type)
		default:
			return errAt(path, "field "+field+".type", "%q is not supported; use ByteLevel, TemplateProcessing or null", p.Type)
		}
	}
	return nil
}

func readTemplate(path, field string, p *templateJSON, spec *loadSpec) error {
	seenA := false
	for j, item := range p.Single {
		place := fmt.Sprintf("field %s.single[%d]", field, j)
		var it struct {
			SpecialToken *struct {
				ID string `json:"id"`
			} `json:"SpecialToken"`
			Sequence *struct {
				ID string `json:"id"`
			} `json:"Sequence"`
		}
		if err := json.Unmarshal(item, &it); err != nil {
			return errAt(path, place, "cannot decode: %v; fix the file", err)
		}
		switch {
		case it.Sequence != nil:
			if it.Sequence.ID != "A" || seenA {
				return errAt(path, place, "sequence %q: the single template must hold sequence \"A\" exactly once", it.Sequence.ID)
			}
			seenA = true
		case it.SpecialToken != nil:
			st, ok := p.specialTokenIDs(it.SpecialToken.ID)
			if !ok || len(st) == 0 {
				return errAt(path, place, "special token %q has no entry with ids in %s.special_tokens; add it", it.SpecialToken.ID, field)
			}
			if seenA {
				spec.suffix = append(spec.suffix, st...)
			} else {
				spec.prefix = append(spec.prefix, st...)
			}
		default:
			return errAt(path, place, "neither SpecialToken nor Sequence; fix the entry")
		}
	}
	if !seenA {
		return errAt(path, "field "+field+".single", "has no Sequence \"A\"; the template must place the text")
	}
	return nil
}

// specialTokenIDs returns the ids of a template special token.
func (p *templateJSON) specialTokenIDs(name string) ([]int, bool) {
	st, ok := p.SpecialTokens[name]
	return st.IDs, ok
}

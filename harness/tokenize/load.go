package tokenize

import (
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
)

// File names LoadDir looks for.
const (
	fileTokenizerJSON   = "tokenizer.json"
	fileVocabJSON       = "vocab.json"
	fileMergesTxt       = "merges.txt"
	fileTokenizerConfig = "tokenizer_config.json"
	fileSpecialTokens   = "special_tokens_map.json"
)

// mergeSpec is one merge rule as read, with the place it came from.
type mergeSpec struct {
	a, b  string
	place string // e.g. "field model.merges[3]" or "line 5"
}

// loadSpec is what a model file says, before it is validated and indexed.
type loadSpec struct {
	vocabFile  string   // file the vocabulary came from
	vocab      []string // id → byte-level string; ids are contiguous
	mergesFile string
	merges     []mergeSpec
	added      []addedToken

	addPrefixSpace bool
	useRegex       bool
	ignoreMerges   bool

	// hasPostProcessor: tokenizer.json has a non-null post_processor, so
	// prefix and suffix (from a TemplateProcessing) govern the add rules.
	hasPostProcessor bool
	prefix, suffix   []int
}

// errAt formats an error for bad user input: the file, the place inside it
// and what is wrong (which should say what to do).
func errAt(file, place, format string, args ...any) error {
	return fmt.Errorf("tokenize: %s: %s: %s", file, place, fmt.Sprintf(format, args...))
}

// LoadDir loads a tokenizer from a checkpoint directory: tokenizer.json, or
// vocab.json + merges.txt, plus the optional tokenizer_config.json and
// special_tokens_map.json (see the package documentation for the rules).
func LoadDir(dir string) (*Tokenizer, error) {
	tjPath := filepath.Join(dir, fileTokenizerJSON)
	var spec *loadSpec
	var err error
	twoFile := false
	switch {
	case fileExists(tjPath):
		spec, err = readTokenizerJSON(tjPath)
	case fileExists(filepath.Join(dir, fileVocabJSON)) || fileExists(filepath.Join(dir, fileMergesTxt)):
		twoFile = true
		spec, err = readVocabMerges(filepath.Join(dir, fileVocabJSON), filepath.Join(dir, fileMergesTxt))
	default:
		return nil, fmt.Errorf("tokenize: %s: no %s and no %s + %s found; point at a checkpoint directory that holds the tokenizer files",
			dir, fileTokenizerJSON, fileVocabJSON, fileMergesTxt)
	}
	if err != nil {
		return nil, err
	}
	cfg, err := readConfigs(filepath.Join(dir, fileTokenizerConfig), filepath.Join(dir, fileSpecialTokens), twoFile)
	if err != nil {
		return nil, err
	}
	if cfg.addPrefixSpace != nil {
		spec.addPrefixSpace = *cfg.addPrefixSpace
	}
	spec.added = append(spec.added, cfg.added...)
	return build(spec, cfg)
}

func fileExists(p string) bool {
	_, err := os.Stat(p)
	return err == nil || !errors.Is(err, fs.ErrNotExist)
}

// build validates a spec and the configuration and assembles a Tokenizer.
func build(spec *loadSpec, cfg *config) (*Tokenizer, error) {
	t := &Tokenizer{bt: newByteTable(), addPrefixSpace: spec.addPrefixSpace, useRegex: spec.useRegex, ignoreMerges: spec.ignoreMerges,
		bos: -1, eos: -1, pad: -1, unk: -1}
	size := len(spec.vocab)
	seen := make(map[int]bool, len(spec.added))
	for i, a := range spec.added {
		// Added tokens extend the vocabulary; an id far past it would make
		// the tables huge from a tiny file.
		if a.id < 0 || a.id >= len(spec.vocab)+len(spec.added) {
			return nil, errAt(spec.vocabFile, fmt.Sprintf("added_tokens[%d]", i), "id %d of %q is beyond the vocabulary of %d tokens and %d added ones; added tokens take the ids right after the vocabulary", a.id, a.content, len(spec.vocab), len(spec.added))
		}
		if seen[a.id] {
			continue // the same token listed twice (tokenizer.json and tokenizer_config.json)
		}
		seen[a.id] = true
		if a.id+1 > size {
			size = a.id + 1
		}
	}
	t.vocab = make([]string, size)
	copy(t.vocab, spec.vocab)
	t.raw = make([][]byte, size)
	t.isAdded = make([]bool, size)
	for id, s := range spec.vocab {
		t.raw[id] = t.bt.decode(s)
	}
	for _, a := range spec.added {
		if t.isAdded[a.id] {
			continue
		}
		t.isAdded[a.id] = true
		t.raw[a.id] = []byte(a.content)
		t.added = append(t.added, a)
	}
	if b := t.finish(); b >= 0 {
		return nil, errAt(spec.vocabFile, "vocab", "no token for byte 0x%02x (symbol %q); a byte-level BPE vocabulary must hold all 256 one-byte symbols: re-export the vocabulary",
			b, string(t.bt.toRune[b]))
	}
	byPair := make(map[uint64]string, len(spec.merges))
	for _, m := range spec.merges {
		ia, okA := t.toID[m.a]
		ib, okB := t.toID[m.b]
		switch {
		case !okA:
			return nil, errAt(spec.mergesFile, m.place, "merge %q %q: symbol %q is not in the vocabulary (%s); the merges and the vocabulary do not belong together", m.a, m.b, m.a, spec.vocabFile)
		case !okB:
			return nil, errAt(spec.mergesFile, m.place, "merge %q %q: symbol %q is not in the vocabulary (%s); the merges and the vocabulary do not belong together", m.a, m.b, m.b, spec.vocabFile)
		}
		if _, ok := t.toID[m.a+m.b]; !ok {
			return nil, errAt(spec.mergesFile, m.place, "merge %q %q: its result %q is not in the vocabulary (%s); the merges and the vocabulary do not belong together", m.a, m.b, m.a+m.b, spec.vocabFile)
		}
		k := pairKey(int32(ia), int32(ib))
		if prev, dup := byPair[k]; dup {
			return nil, errAt(spec.mergesFile, m.place, "merge %q %q repeats the merge at %s; remove the duplicate", m.a, m.b, prev)
		}
		byPair[k] = m.place
		t.merges = append(t.merges, [2]int32{int32(ia), int32(ib)})
	}
	t.finish()
	if err := t.applyConfig(spec, cfg); err != nil {
		return nil, err
	}
	return t, nil
}

// applyConfig resolves the special-token names and the add rules.
func (t *Tokenizer) applyConfig(spec *loadSpec, cfg *config) error {
	resolve := func(n tokenName) (int, error) {
		if n.value == "" {
			return -1, nil
		}
		if id, ok := t.lookup(n.value); ok {
			return id, nil
		}
		return -1, errAt(n.file, "field "+n.field, "token %q is not in the vocabulary or the added tokens; fix the field or add the token", n.value)
	}
	var err error
	if t.bos, err = resolve(cfg.bos); err != nil {
		return err
	}
	if t.eos, err = resolve(cfg.eos); err != nil {
		return err
	}
	if t.pad, err = resolve(cfg.pad); err != nil {
		return err
	}
	if t.unk, err = resolve(cfg.unk); err != nil {
		return err
	}
	if spec.hasPostProcessor {
		for _, id := range append(append([]int(nil), spec.prefix...), spec.suffix...) {
			if id < 0 || id >= len(t.raw) || t.raw[id] == nil {
				return errAt(spec.vocabFile, "field post_processor", "template token id %d is not a token of this vocabulary (0..%d); fix the template's special_tokens ids", id, len(t.raw)-1)
			}
		}
		t.prefix, t.suffix = spec.prefix, spec.suffix
		if t.bos < 0 && len(t.prefix) > 0 {
			t.bos = t.prefix[0]
		}
		if t.eos < 0 && len(t.suffix) > 0 {
			t.eos = t.suffix[len(t.suffix)-1]
		}
		return nil
	}
	if cfg.addBOS {
		if t.bos < 0 {
			return errAt(cfg.file, "field add_bos_token", "is true but no bos_token is configured; set bos_token or make add_bos_token false")
		}
		t.prefix = []int{t.bos}
	}
	if cfg.addEOS {
		if t.eos < 0 {
			return errAt(cfg.file, "field add_eos_token", "is true but no eos_token is configured; set eos_token or make add_eos_token false")
		}
		t.suffix = []int{t.eos}
	}
	return nil
}

// lookup finds a token by name: an added token's content, a vocabulary
// string, or the byte-level form of the name.
func (t *Tokenizer) lookup(name string) (int, bool) {
	for _, a := range t.added {
		if a.content == name {
			return a.id, true
		}
	}
	if id, ok := t.toID[name]; ok {
		return id, true
	}
	id, ok := t.toID[t.bt.encode([]byte(name))]
	return id, ok
}

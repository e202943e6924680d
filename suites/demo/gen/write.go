package gen

import (
	"bytes"
	"encoding/binary"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/tokenize"
)

// WriteData writes the committed splits into dir: heldout.txt, weather.txt,
// items/FAMILY.jsonl and pools/FAMILY.jsonl.
func WriteData(dir string, d *Data) error {
	for _, sub := range []string{"items", "pools"} {
		if err := os.MkdirAll(filepath.Join(dir, sub), 0o755); err != nil {
			return err
		}
	}
	if err := atomicfile.WriteFile(filepath.Join(dir, "heldout.txt"), []byte(Text(d.HeldOut))); err != nil {
		return err
	}
	if err := atomicfile.WriteFile(filepath.Join(dir, "weather.txt"), []byte(Text(d.Weather))); err != nil {
		return err
	}
	for _, fam := range Families() {
		for sub, items := range map[string][]Item{"items": d.Items[fam], "pools": d.Pools[fam]} {
			b, err := JSONL(items)
			if err != nil {
				return err
			}
			if err := atomicfile.WriteFile(filepath.Join(dir, sub, fam+".jsonl"), b); err != nil {
				return err
			}
		}
	}
	return nil
}

// JSONL encodes items one JSON object per line, without HTML escaping.
func JSONL(items []Item) ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	for _, it := range items {
		if err := enc.Encode(it); err != nil {
			return nil, fmt.Errorf("encoding item %s: %w", it.ID, err)
		}
	}
	return b.Bytes(), nil
}

// TrainTokenizer trains the demo tokenizer on the training documents: byte-level
// BPE of vocab ids with "<s>", "<pad>" and "</s>" specials, and "</s>" as the
// BOS that starts every document, as OPT-family tokenizers do.
func TrainTokenizer(d *Data, vocab int) (*tokenize.Tokenizer, error) {
	return tokenize.Train(d.Train, tokenize.TrainOptions{
		VocabSize: vocab, Specials: []string{"<s>", "<pad>", "</s>"},
		AddBOS: true, BOS: "</s>", EOS: "</s>", PAD: "<pad>",
	})
}

// WriteIDs encodes each document as the model sees it (BOS first) and writes
// all ids back to back as little-endian uint16, the trainer's input format.
func WriteIDs(path string, tok *tokenize.Tokenizer, docs []string) (int, error) {
	if tok.VocabSize() > 1<<16 {
		return 0, fmt.Errorf("vocabulary of %d does not fit uint16 ids", tok.VocabSize())
	}
	var buf []byte
	n := 0
	for _, doc := range docs {
		for _, id := range tok.EncodeForModel(doc) {
			buf = binary.LittleEndian.AppendUint16(buf, uint16(id))
			n++
		}
	}
	return n, atomicfile.WriteFile(path, buf)
}

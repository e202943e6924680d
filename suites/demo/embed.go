package demo

import (
	"embed"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"

	"sparsegate/harness/atomicfile"
)

// files holds the demo model and data inside the binary, so the demo runs from
// any directory. It is read-only.
//
//go:embed suite.yaml
//go:embed model/config.json model/model.safetensors model/tokenizer.json model/tokenizer_config.json model/MODEL_CARD.md
//go:embed data/heldout.txt data/weather.txt data/items/*.jsonl data/pools/*.jsonl
var files embed.FS

// FS returns the embedded files: model/ (a checkpoint directory) and data/
// (held-out texts, probe items and few-shot pools).
func FS() fs.FS { return files }

// Extract writes the embedded files under dir (model/… and data/…), each
// atomically, and returns dir. The engine then loads dir/model exactly as it
// loads any checkpoint.
func Extract(dir string) (string, error) {
	err := fs.WalkDir(files, ".", func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		dst := filepath.Join(dir, filepath.FromSlash(p))
		if d.IsDir() {
			return os.MkdirAll(dst, 0o755)
		}
		b, err := files.ReadFile(p)
		if err != nil {
			return err
		}
		return atomicfile.WriteFile(dst, b)
	})
	if err != nil {
		return "", fmt.Errorf("extracting the demo files into %s: %w", dir, err)
	}
	return dir, nil
}

// ReadFile returns one embedded file by its slash-separated path, e.g.
// "data/heldout.txt".
func ReadFile(name string) ([]byte, error) { return files.ReadFile(path.Clean(name)) }

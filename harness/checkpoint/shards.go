package checkpoint

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
)

// SingleFileName is the weight file of an unsharded checkpoint directory.
const SingleFileName = "model.safetensors"

// IndexFileName is the index of a sharded checkpoint directory: a JSON
// object {"metadata": {...}, "weight_map": {tensor name: shard file name}},
// the layout open checkpoints ship with (common practice, no source).
const IndexFileName = "model.safetensors.index.json"

// Weights is the whole weight set of a checkpoint directory: one
// model.safetensors, or the shards listed by model.safetensors.index.json.
type Weights struct {
	dir    string
	index  bool // true when sharded
	files  []*File
	byName map[string]*Tensor
	names  []string
	total  int64
}

// OpenWeights opens the weights of checkpoint directory dir. A directory
// holding both model.safetensors and model.safetensors.index.json is refused
// as ambiguous. For a sharded checkpoint every shard the index names is
// opened and cross-checked: each tensor must be in exactly one shard, the one
// the index assigns it to, and every tensor of every shard must be indexed.
func OpenWeights(dir string) (*Weights, error) {
	dir = filepath.Clean(dir)
	hasIndex, err := exists(filepath.Join(dir, IndexFileName))
	if err != nil {
		return nil, err
	}
	hasSingle, err := exists(filepath.Join(dir, SingleFileName))
	if err != nil {
		return nil, err
	}
	switch {
	case hasIndex && hasSingle:
		return nil, fmt.Errorf("%s: holds both %s and %s, so which weights to use is ambiguous; remove the stale one", dir, SingleFileName, IndexFileName)
	case hasSingle:
		f, err := Open(filepath.Join(dir, SingleFileName))
		if err != nil {
			return nil, err
		}
		return newWeights(dir, false, []*File{f}), nil
	case hasIndex:
		return openSharded(dir)
	}
	return nil, fmt.Errorf("%s: no %s or %s found; point at a checkpoint directory", dir, SingleFileName, IndexFileName)
}

// exists reports whether path exists, failing on errors other than absence.
func exists(path string) (bool, error) {
	_, err := os.Stat(path)
	if err == nil {
		return true, nil
	}
	if errors.Is(err, fs.ErrNotExist) {
		return false, nil
	}
	return false, fmt.Errorf("checkpoint: %w", err)
}

// newWeights indexes the tensors of already cross-checked files.
func newWeights(dir string, sharded bool, files []*File) *Weights {
	sort.Slice(files, func(i, j int) bool { return files[i].path < files[j].path })
	w := &Weights{dir: dir, index: sharded, files: files, byName: map[string]*Tensor{}}
	for _, f := range files {
		for _, t := range f.tensors {
			w.byName[t.Name] = t
			w.names = append(w.names, t.Name)
			w.total += int64(len(t.data))
		}
	}
	sort.Strings(w.names)
	return w
}

// openSharded opens and cross-checks the shards of an index.
func openSharded(dir string) (_ *Weights, err error) {
	idxPath := filepath.Join(dir, IndexFileName)
	st, err := os.Stat(idxPath)
	if err != nil {
		return nil, fmt.Errorf("checkpoint: %w", err)
	}
	if st.Size() > MaxHeaderBytes {
		return nil, fmt.Errorf("%s: %d bytes is over the %d-byte limit for an index; the index is damaged, re-download it", idxPath, st.Size(), MaxHeaderBytes)
	}
	raw, err := os.ReadFile(idxPath)
	if err != nil {
		return nil, fmt.Errorf("checkpoint: %w", err)
	}
	weightMap, err := parseIndex(idxPath, raw)
	if err != nil {
		return nil, err
	}
	shardSet := map[string]bool{}
	for _, name := range sortedKeys(weightMap) {
		shard := weightMap[name]
		if !shardSet[shard] {
			if err := checkShardName(shard); err != nil {
				return nil, fmt.Errorf("%s: tensor %q: shard name %q %v; the index is damaged, re-download it", idxPath, name, shard, err)
			}
			shardSet[shard] = true
		}
	}
	var files []*File
	defer func() {
		if err != nil {
			for _, f := range files {
				_ = f.Close()
			}
		}
	}()
	owner := map[string]string{} // tensor -> shard holding it
	for _, shard := range sortedKeys(shardSet) {
		f, err := Open(filepath.Join(dir, shard))
		if err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				return nil, fmt.Errorf("%s: shard %q named by the index is missing (%w); re-download the checkpoint", idxPath, shard, err)
			}
			return nil, err
		}
		files = append(files, f)
		for _, t := range f.tensors {
			if other, dup := owner[t.Name]; dup {
				return nil, fmt.Errorf("%s: tensor %q is in two shards, %s and %s; the checkpoint is damaged, re-download or re-export it", dir, t.Name, other, shard)
			}
			owner[t.Name] = shard
		}
	}
	for _, name := range sortedKeys(owner) {
		if _, ok := weightMap[name]; !ok {
			return nil, fmt.Errorf("%s: tensor %q is in shard %s but not in the index's weight_map; the index is stale, re-download it", idxPath, name, owner[name])
		}
	}
	for _, name := range sortedKeys(weightMap) {
		want := weightMap[name]
		if got, ok := owner[name]; !ok || got != want {
			where := "no shard holds it"
			if ok {
				where = "it is in " + got
			}
			return nil, fmt.Errorf("%s: the index assigns tensor %q to shard %s, which does not hold it (%s); the index is stale, re-download it", idxPath, name, want, where)
		}
	}
	return newWeights(dir, true, files), nil
}

// checkShardName refuses shard names that could leave the directory.
func checkShardName(s string) error {
	switch {
	case s == "" || s == "." || s == "..":
		return errors.New("is not a file name")
	case filepath.IsAbs(s) || strings.HasPrefix(s, "/"):
		return errors.New("is an absolute path")
	case strings.ContainsAny(s, `/\`):
		return errors.New("contains a path separator")
	}
	return nil
}

// parseIndex reads the weight_map of an index, refusing duplicate keys.
// Other top-level fields ("metadata" and any extension) are skipped.
func parseIndex(path string, raw []byte) (map[string]string, error) {
	dec := json.NewDecoder(bytes.NewReader(raw))
	bad := func(format string, args ...any) error {
		return fmt.Errorf("%s: near byte %d: %s; the index is damaged, re-download it",
			path, dec.InputOffset(), fmt.Sprintf(format, args...))
	}
	tok := func() (json.Token, error) {
		t, err := dec.Token()
		if err != nil {
			if err == io.EOF {
				err = io.ErrUnexpectedEOF
			}
			return nil, bad("not valid JSON: %v", err)
		}
		return t, nil
	}
	expect := func(want json.Delim, what string) error {
		t, err := tok()
		if err != nil {
			return err
		}
		if d, ok := t.(json.Delim); !ok || d != want {
			return bad("%s must be a JSON %s, found %s", what, delimKind(want), describeToken(t))
		}
		return nil
	}
	key := func() (string, error) {
		t, err := tok()
		if err != nil {
			return "", err
		}
		k, ok := t.(string)
		if !ok {
			return "", bad("expected an object key, found %s", describeToken(t))
		}
		return k, nil
	}
	if err := expect('{', "the index"); err != nil {
		return nil, err
	}
	var weightMap map[string]string
	seen := map[string]bool{}
	for dec.More() {
		k, err := key()
		if err != nil {
			return nil, err
		}
		if seen[k] {
			return nil, bad("field %q appears twice", k)
		}
		seen[k] = true
		if k != "weight_map" {
			var skip json.RawMessage
			if err := dec.Decode(&skip); err != nil {
				return nil, bad("not valid JSON in field %q: %v", k, err)
			}
			continue
		}
		if err := expect('{', "weight_map"); err != nil {
			return nil, err
		}
		weightMap = map[string]string{}
		for dec.More() {
			name, err := key()
			if err != nil {
				return nil, err
			}
			if _, dup := weightMap[name]; dup {
				return nil, bad("weight_map lists tensor %q twice", name)
			}
			t, err := tok()
			if err != nil {
				return nil, err
			}
			shard, ok := t.(string)
			if !ok {
				return nil, bad("weight_map entry for tensor %q must be a shard file name, found %s", name, describeToken(t))
			}
			weightMap[name] = shard
		}
		if err := expect('}', "weight_map"); err != nil {
			return nil, err
		}
	}
	if err := expect('}', "the index"); err != nil {
		return nil, err
	}
	if t, err := dec.Token(); err != io.EOF {
		return nil, bad("unexpected data after the index object (%v %v)", describeToken(t), err)
	}
	if weightMap == nil {
		return nil, fmt.Errorf("%s: no \"weight_map\" object; the index is damaged, re-download it", path)
	}
	if len(weightMap) == 0 {
		return nil, fmt.Errorf("%s: \"weight_map\" lists no tensors; the index is damaged, re-download it", path)
	}
	return weightMap, nil
}

// sortedKeys returns the keys of m in increasing order.
func sortedKeys[V any](m map[string]V) []string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	return keys
}

// Close unmaps every file; tensors obtained from w must not be used after.
func (w *Weights) Close() error {
	var errs []error
	for _, f := range w.files {
		if err := f.Close(); err != nil {
			errs = append(errs, err)
		}
	}
	return errors.Join(errs...)
}

// Dir returns the checkpoint directory (cleaned).
func (w *Weights) Dir() string { return w.dir }

// Files returns the paths of the weight files, sorted.
func (w *Weights) Files() []string {
	out := make([]string, len(w.files))
	for i, f := range w.files {
		out[i] = f.path
	}
	return out
}

// Names returns every tensor name, sorted.
func (w *Weights) Names() []string { return append([]string(nil), w.names...) }

// Lookup returns the named tensor and whether it exists.
func (w *Weights) Lookup(name string) (*Tensor, bool) {
	t, ok := w.byName[name]
	return t, ok
}

// Tensor returns the named tensor, or an error naming the directory and
// the file(s) searched.
func (w *Weights) Tensor(name string) (*Tensor, error) {
	if t, ok := w.byName[name]; ok {
		return t, nil
	}
	searched := SingleFileName
	if w.index {
		bases := make([]string, len(w.files))
		for i, f := range w.files {
			bases[i] = filepath.Base(f.path)
		}
		searched = strings.Join(bases, ", ") + " (the shards of " + IndexFileName + ")"
	}
	return nil, fmt.Errorf("%s: tensor %q not found in %s; check that the weights match the model config", w.dir, name, searched)
}

// TotalBytes returns the total size of all tensor data, headers excluded
// (the quantity an index records as metadata.total_size).
func (w *Weights) TotalBytes() int64 { return w.total }

// SHA256 returns a hex digest identifying the weight files.
//
// For a single file it is exactly the SHA-256 of model.safetensors, the
// value `sha256sum model.safetensors` prints. For a sharded checkpoint it is
// the SHA-256 of the text `sha256sum` would print for the shards in file-name
// order: one line "<hex digest>  <file name>\n" per shard (two spaces, base
// name only, lower-case hex), sorted by file name. The index file itself is
// not hashed. The bytes hashed are those of the open mappings, i.e. exactly
// the data being served.
func (w *Weights) SHA256() (string, error) {
	if !w.index {
		return hashFile(w.files[0])
	}
	lines := sha256.New()
	for _, f := range w.files { // sorted by path, same directory
		sum, err := hashFile(f)
		if err != nil {
			return "", err
		}
		fmt.Fprintf(lines, "%s  %s\n", sum, filepath.Base(f.path))
	}
	return hex.EncodeToString(lines.Sum(nil)), nil
}

// hashFile returns the hex SHA-256 of an open file's mapped bytes.
func hashFile(f *File) (string, error) {
	if f.data == nil {
		return "", fmt.Errorf("%s: file is closed; hash the weights before closing them", f.path)
	}
	sum := sha256.Sum256(f.data)
	return hex.EncodeToString(sum[:]), nil
}

package checkpoint

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// WriteSharded writes tensors as a sharded checkpoint in dir: shard files
// model-00001-of-0000N.safetensors … (each written with Write, carrying
// metadata) and then model.safetensors.index.json with "metadata":
// {"total_size": <bytes of tensor data>} and the sorted "weight_map".
// Tensors are packed into shards greedily in the given order; a shard is
// closed when the next tensor would take it over maxShardBytes of tensor
// data, and a tensor larger than that gets a shard of its own.
//
// Every file is written atomically. The index is written last, so a failed
// call never leaves an index naming missing shards; shards this call wrote
// before failing are removed. Files of an earlier, different write in dir
// are not touched.
func WriteSharded(dir string, tensors []NamedTensor, metadata map[string]string, maxShardBytes int64) error {
	if maxShardBytes <= 0 {
		return fmt.Errorf("%s: maximum shard size %d must be positive", dir, maxShardBytes)
	}
	if len(tensors) == 0 {
		return fmt.Errorf("%s: no tensors to write; a checkpoint needs at least one", dir)
	}
	if _, err := layoutTensors(dir, tensors); err != nil {
		return err
	}
	var groups [][]NamedTensor
	var cur []NamedTensor
	var curBytes, total int64
	for _, t := range tensors {
		n := int64(len(t.Data))
		if len(cur) > 0 && curBytes+n > maxShardBytes {
			groups = append(groups, cur)
			cur, curBytes = nil, 0
		}
		cur = append(cur, t)
		curBytes += n
		total += n
	}
	groups = append(groups, cur)

	weightMap := make(map[string]string, len(tensors))
	var written []string
	for i, g := range groups {
		name := fmt.Sprintf("model-%05d-of-%05d.safetensors", i+1, len(groups))
		path := filepath.Join(dir, name)
		if err := Write(path, g, metadata); err != nil {
			return errors.Join(err, removeAll(written))
		}
		written = append(written, path)
		for _, t := range g {
			weightMap[t.Name] = name
		}
	}
	index := struct {
		Metadata  map[string]int64  `json:"metadata"`
		WeightMap map[string]string `json:"weight_map"`
	}{map[string]int64{"total_size": total}, weightMap}
	var buf bytes.Buffer
	enc := json.NewEncoder(&buf)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", "  ")
	if err := enc.Encode(index); err != nil {
		return errors.Join(fmt.Errorf("%s: encode index: %w", dir, err), removeAll(written))
	}
	err := writeAtomic(filepath.Join(dir, IndexFileName), func(f io.Writer) error {
		_, err := f.Write(buf.Bytes())
		return err
	})
	if err != nil {
		return errors.Join(err, removeAll(written))
	}
	return nil
}

// removeAll removes the given files, returning any failures.
func removeAll(paths []string) error {
	var errs []error
	for _, p := range paths {
		if err := os.Remove(p); err != nil {
			errs = append(errs, fmt.Errorf("checkpoint: clean up %s: %w", p, err))
		}
	}
	return errors.Join(errs...)
}

package runner

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/engine"
	"sparsegate/harness/results"
	"sparsegate/harness/sparsity"
)

// Open loads a build directory as a target: a sparse build when it holds a
// manifest (its dense base is loaded too), else a checkpoint (dense or
// pruned). Close the target when done.
func Open(dir string, opts engine.Options) (*Target, error) {
	if _, err := os.Stat(filepath.Join(dir, sparsity.ManifestFile)); err == nil {
		b, err := sparsity.Open(dir, sparsity.OpenOptions{Engine: opts})
		if err != nil {
			return nil, err
		}
		t := &Target{Model: b.Base, Build: b, Info: results.Build{Path: dir, Kind: "sparse"}}
		if err := t.fillHashes(); err != nil {
			b.Close()
			return nil, err
		}
		mh, err := manifestHash(dir, b.Manifest)
		if err != nil {
			b.Close()
			return nil, err
		}
		t.Info.ManifestHash = mh
		return t, nil
	}
	m, err := engine.Load(dir, opts)
	if err != nil {
		return nil, err
	}
	t := &Target{Model: m, Info: results.Build{Path: dir, Kind: "checkpoint"}}
	if err := t.fillHashes(); err != nil {
		m.Close()
		return nil, err
	}
	return t, nil
}

// BaseOf returns the dense base of a sparse build as a target of its own
// (sharing the loaded model), for runs given only a candidate.
func BaseOf(t *Target) *Target {
	if t.Build == nil {
		return nil
	}
	dir := t.Build.Manifest.Base.Path
	if !filepath.IsAbs(dir) {
		dir = filepath.Join(t.Info.Path, dir)
	}
	return &Target{Model: t.Model, Info: results.Build{Path: filepath.Clean(dir), Kind: "checkpoint",
		WeightsHash: t.Info.WeightsHash, TokenizerHash: t.Info.TokenizerHash}}
}

// Close releases the target's model (and build).
func (t *Target) Close() error {
	if t.Build != nil {
		return t.Build.Close()
	}
	return t.Model.Close()
}

func (t *Target) fillHashes() error {
	h, err := t.Model.Weights().SHA256()
	if err != nil {
		return fmt.Errorf("hashing the weights of %s: %w", t.Model.Dir, err)
	}
	t.Info.WeightsHash = h
	if t.Model.Tokenizer != nil {
		t.Info.TokenizerHash = t.Model.Tokenizer.SHA256()
	}
	return nil
}

// manifestHash is the SHA-256 of the manifest file and its predictor weights.
func manifestHash(dir string, m *sparsity.Manifest) (string, error) {
	h := sha256.New()
	files := []string{sparsity.ManifestFile}
	if m.Predictors != "" {
		files = append(files, m.Predictors)
	}
	for _, f := range files {
		b, err := os.ReadFile(filepath.Join(dir, f))
		if err != nil {
			return "", fmt.Errorf("hashing the build: %w", err)
		}
		fmt.Fprintf(h, "%s %d\n", f, len(b))
		h.Write(b)
	}
	return hex.EncodeToString(h.Sum(nil)), nil
}

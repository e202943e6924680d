package runner

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/results"
	"sparsegate/harness/version"
)

// The base-result cache keeps the base's per-item records of perplexity,
// choice and generation probes, one JSON file per key, where the key is the
// SHA-256 of (harness version, weights, manifest, forced-dense units,
// tokenizer, probe definition and data, shard). A changed input is a new
// key, never a stale hit; a corrupt entry is ignored and rewritten.

func cacheKey(t *Target, probeHash string, sh results.Shard) string {
	h := sha256.New()
	fmt.Fprintf(h, "sparsegate-base-cache 1\n%s\n%s\n%s\n%v\n%s\n%s\n%d/%d\n",
		version.Version, t.Info.WeightsHash, t.Info.ManifestHash, t.Info.Dense, t.Info.TokenizerHash, probeHash, sh.Index, sh.Count)
	return hex.EncodeToString(h.Sum(nil))
}

func (rc *runCtx) cachePath(pp *prepared, t *Target) string {
	if rc.opts.CacheDir == "" || t.Info.WeightsHash == "" {
		return ""
	}
	k := cacheKey(t, pp.probe.Hash, rc.opts.Shard)
	return filepath.Join(rc.opts.CacheDir, k[:2], k+".json")
}

// cachedFor returns t's cached records of the probe.
func (rc *runCtx) cachedFor(pp *prepared, t *Target) (*results.Probe, bool) {
	path := rc.cachePath(pp, t)
	if path == "" {
		return nil, false
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, false
	}
	var p results.Probe
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.DisallowUnknownFields()
	if dec.Decode(&p) != nil || p.Hash != pp.probe.Hash || p.Kind != pp.probe.Kind {
		return nil, false
	}
	return &p, true
}

// storeFor writes t's records of the probe to the cache; failures to cache
// are not errors (the cache only saves time).
func (rc *runCtx) storeFor(pp *prepared, t *Target, p *results.Probe) {
	path := rc.cachePath(pp, t)
	if path == "" {
		return
	}
	data, err := json.Marshal(p)
	if err != nil {
		return
	}
	if os.MkdirAll(filepath.Dir(path), 0o755) == nil {
		_ = atomicfile.WriteFile(path, data)
	}
}

// cached and store apply the cache to a text probe whose subject is the base.
func (rc *runCtx) cached(pp *prepared, pr *results.Probe) (*results.Probe, bool) {
	if rc.role != RoleBase {
		return nil, false
	}
	return rc.cachedFor(pp, rc.subject)
}

func (rc *runCtx) store(pp *prepared, pr *results.Probe) {
	if rc.role == RoleBase {
		rc.storeFor(pp, rc.subject, &results.Probe{Name: pr.Name, Kind: pr.Kind, Hash: pr.Hash, Items: pr.Items})
	}
}

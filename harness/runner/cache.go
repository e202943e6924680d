package runner

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"sync"

	"sparsegate/harness/atomicfile"
	"sparsegate/harness/engine"
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

// A Memo keeps base results in memory across runs of one process (bisect
// and sweep run the same suite many times against the same base): base
// records of item probes and the base's logits for drift windows. Safe for
// concurrent use.
type Memo struct {
	mu       sync.Mutex
	probes   map[string]*results.Probe
	logits   map[string][]float32
	prefixes map[string]*engine.Prefix
	bytes    int64
	// Hits and Misses count dense prefixes reused and computed.
	Hits, Misses int
}

// MemoBytes bounds the floats a Memo keeps (logits and prefixes); past it,
// results are recomputed instead of kept.
const MemoBytes = 512 << 20

// NewMemo returns an empty memo.
func NewMemo() *Memo {
	return &Memo{probes: map[string]*results.Probe{}, logits: map[string][]float32{}, prefixes: map[string]*engine.Prefix{}}
}

// prefix returns the dense prefix of a window, computing and keeping it.
func (m *Memo) prefix(k string, compute func() (*engine.Prefix, error)) (*engine.Prefix, error) {
	m.mu.Lock()
	p, ok := m.prefixes[k]
	if ok {
		m.Hits++
	}
	m.mu.Unlock()
	if ok {
		return p, nil
	}
	p, err := compute()
	if err != nil {
		return nil, err
	}
	m.mu.Lock()
	m.Misses++
	if size := int64(4 * (len(p.At) + len(p.Prev))); m.bytes+size <= MemoBytes {
		m.prefixes[k] = p
		m.bytes += size
	}
	m.mu.Unlock()
	return p, nil
}

func (m *Memo) probe(k string) (*results.Probe, bool) {
	if m == nil {
		return nil, false
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	p, ok := m.probes[k]
	return p, ok
}

func (m *Memo) putProbe(k string, p *results.Probe) {
	if m != nil {
		m.mu.Lock()
		m.probes[k] = p
		m.mu.Unlock()
	}
}

func (m *Memo) logitsFor(k string) ([]float32, bool) {
	if m == nil {
		return nil, false
	}
	m.mu.Lock()
	defer m.mu.Unlock()
	l, ok := m.logits[k]
	return l, ok
}

func (m *Memo) putLogits(k string, l []float32) {
	if m != nil {
		m.mu.Lock()
		if size := int64(4 * len(l)); m.bytes+size <= MemoBytes {
			m.logits[k] = l
			m.bytes += size
		}
		m.mu.Unlock()
	}
}

// cachedFor returns t's cached records of the probe, from the memo or the
// cache directory.
func (rc *runCtx) cachedFor(pp *prepared, t *Target) (*results.Probe, bool) {
	mk := cacheKey(t, pp.probe.Hash, rc.opts.Shard)
	if p, ok := rc.opts.Memo.probe(mk); ok {
		return cloneProbe(p), true
	}
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
	rc.opts.Memo.putProbe(mk, cloneProbe(&p))
	return &p, true
}

// cloneProbe copies a probe's item list so callers may modify items.
func cloneProbe(p *results.Probe) *results.Probe {
	c := *p
	c.Items = append([]results.Item(nil), p.Items...)
	return &c
}

// storeFor writes t's records of the probe to the cache; failures to cache
// are not errors (the cache only saves time).
func (rc *runCtx) storeFor(pp *prepared, t *Target, p *results.Probe) {
	rc.opts.Memo.putProbe(cacheKey(t, pp.probe.Hash, rc.opts.Shard), cloneProbe(p))
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

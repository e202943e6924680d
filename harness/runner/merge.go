package runner

import (
	"cmp"
	"fmt"
	"slices"
	"strings"

	"sparsegate/harness/results"
)

// Merge combines the Results of the shards of one run into the Results of
// the unsharded run: per probe, the items of every shard in their unsharded
// order, metrics recomputed from them (so they equal the unsharded ones
// exactly), and whole-probe kinds (sparsity, speed) taken from the shard that
// ran them. Every shard 1…n must be given once, all of the same suite and
// builds.
func Merge(parts []*results.Results) (*results.Results, error) {
	if len(parts) == 0 {
		return nil, fmt.Errorf("%w: no results to merge", ErrInput)
	}
	n := parts[0].Shard.Count
	seen := map[int]bool{}
	for i, r := range parts {
		if r.Shard.Count != n {
			return nil, inputErr("results %d are shard %d/%d, the first are of %d shards", i+1, r.Shard.Index, r.Shard.Count, n)
		}
		if seen[r.Shard.Index] {
			return nil, inputErr("shard %d/%d is given twice", r.Shard.Index, n)
		}
		seen[r.Shard.Index] = true
		if r.Suite != parts[0].Suite || !sameBuild(r.Base, parts[0].Base) || !sameBuild(r.Candidate, parts[0].Candidate) || r.Harness != parts[0].Harness {
			return nil, inputErr("results %d are of a different suite, build or harness than the first", i+1)
		}
		if len(r.Probes) != len(parts[0].Probes) {
			return nil, inputErr("results %d have %d probes, the first %d", i+1, len(r.Probes), len(parts[0].Probes))
		}
	}
	if len(seen) != n {
		var missing []string
		for i := 1; i <= n; i++ {
			if !seen[i] {
				missing = append(missing, fmt.Sprintf("%d/%d", i, n))
			}
		}
		return nil, inputErr("%d of %d shards given; merge needs all of them (missing: %s)", len(seen), n, strings.Join(missing, ", "))
	}
	out := *parts[0]
	out.Shard = results.Shard{Index: 1, Count: 1}
	out.Probes = nil
	for pi, p0 := range parts[0].Probes {
		m := &results.Probe{Name: p0.Name, Kind: p0.Kind, Hash: p0.Hash, Status: results.Skipped, Metrics: []results.Metric{}}
		whole := false
		for _, r := range parts {
			p := r.Probes[pi]
			if p.Name != p0.Name || p.Hash != p0.Hash {
				return nil, inputErr("probe %d is %q in one shard and %q in another", pi+1, p0.Name, p.Name)
			}
			m.Seconds += p.Seconds
			switch p.Status {
			case results.Failed:
				m.Status, m.Note = results.Failed, p.Note
			case results.Ran:
				if m.Status != results.Failed {
					m.Status, m.Subject = results.Ran, p.Subject
				}
				m.Items = append(m.Items, p.Items...)
				if len(p.Units) > 0 || p.Kind == "speed" || p.Kind == "sparsity" {
					whole = true
					m.Units, m.Metrics = p.Units, p.Metrics
				}
			case results.Skipped:
				if m.Note == "" {
					m.Note = p.Note
				}
			}
		}
		if m.Status == results.Ran {
			m.Note = ""
		}
		slices.SortStableFunc(m.Items, func(a, b results.Item) int { return cmp.Compare(a.Index, b.Index) })
		if m.Status == results.Ran && !whole {
			if err := Recompute(m); err != nil {
				return nil, fmt.Errorf("probe %q: %w", m.Name, err)
			}
		}
		out.Probes = append(out.Probes, m)
	}
	return &out, nil
}

func sameBuild(a, b *results.Build) bool {
	if a == nil || b == nil {
		return a == b
	}
	return a.Path == b.Path && a.WeightsHash == b.WeightsHash && a.ManifestHash == b.ManifestHash
}

package runner

import (
	"hash/fnv"

	"sparsegate/harness/results"
)

// ShardOf returns the 1-based shard of n that owns item id of probe: a
// stable FNV-1a hash of (probe, id), so shards never depend on item order,
// threads or the machine. A whole-probe unit (sparsity, speed) uses id "".
func ShardOf(probe, id string, n int) int {
	h := fnv.New64a()
	h.Write([]byte(probe))
	h.Write([]byte{0})
	h.Write([]byte(id))
	return int(h.Sum64()%uint64(n)) + 1
}

func inShard(s results.Shard, probe, id string) bool {
	return s.Count <= 1 || ShardOf(probe, id, s.Count) == s.Index
}

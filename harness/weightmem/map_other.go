//go:build !linux

package weightmem

// mapHuge maps nothing on this system: the heap serves every request.
func mapHuge(size int) []byte { return nil }

// unmapHuge is never called without mappings.
func unmapHuge(m []byte) error { return nil }

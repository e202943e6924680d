//go:build linux

package weightmem

import (
	"fmt"
	"unsafe"

	"golang.org/x/sys/unix"
)

// mapHuge maps size zeroed bytes (a multiple of hugePage) aligned to
// hugePage and advises transparent huge pages on them; nil when mmap fails.
// The advice is a hint: where huge pages are off it changes nothing.
func mapHuge(size int) []byte {
	p, err := unix.MmapPtr(-1, 0, nil, uintptr(size+hugePage), unix.PROT_READ|unix.PROT_WRITE, unix.MAP_PRIVATE|unix.MAP_ANON)
	if err != nil {
		return nil
	}
	base := uintptr(p)
	start := (base + hugePage - 1) &^ (hugePage - 1)
	// Give back the unaligned lead and the tail past the aligned range.
	if lead := start - base; lead > 0 {
		_ = unix.MunmapPtr(p, lead)
	}
	if tail := base + uintptr(size+hugePage) - (start + uintptr(size)); tail > 0 {
		_ = unix.MunmapPtr(unsafe.Add(p, start-base+uintptr(size)), tail)
	}
	m := unsafe.Slice((*byte)(unsafe.Add(p, start-base)), size)
	_ = unix.Madvise(m, unix.MADV_HUGEPAGE)
	return m
}

// unmapHuge releases a mapping made by mapHuge.
func unmapHuge(m []byte) error {
	if err := unix.MunmapPtr(unsafe.Pointer(&m[0]), uintptr(len(m))); err != nil {
		return fmt.Errorf("weightmem: unmap %d bytes: %w", len(m), err)
	}
	return nil
}

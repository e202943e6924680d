// Package atomicfile writes files so that readers see either the old content or
// the complete new content, never a half-written file: data goes to a temporary
// file in the target's directory, is synced, and is renamed over the target;
// the directory is synced so the rename survives a crash.
package atomicfile

import (
	"bufio"
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// A File is a pending replacement of a path. Write to it, then Commit; Abort
// (safe to defer, a no-op after Commit) removes the temporary file.
type File struct {
	*bufio.Writer
	path string
	tmp  *os.File
	done bool
}

// Create starts writing a replacement for path. The directory must exist.
func Create(path string) (*File, error) {
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return nil, fmt.Errorf("creating %s: %w", path, err)
	}
	return &File{Writer: bufio.NewWriterSize(tmp, 1<<20), path: path, tmp: tmp}, nil
}

// Commit flushes, syncs and renames the temporary file over the target.
func (f *File) Commit() error {
	if f.done {
		return errors.New("atomicfile: Commit after Commit or Abort")
	}
	f.done = true
	err := f.Flush()
	if err == nil {
		err = f.tmp.Sync()
	}
	if cerr := f.tmp.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Chmod(f.tmp.Name(), 0o644)
	}
	if err == nil {
		err = os.Rename(f.tmp.Name(), f.path)
	}
	if err != nil {
		os.Remove(f.tmp.Name())
		return fmt.Errorf("writing %s: %w", f.path, err)
	}
	if d, derr := os.Open(filepath.Dir(f.path)); derr == nil {
		d.Sync() // best effort: some filesystems refuse to sync directories
		d.Close()
	}
	return nil
}

// Abort discards the pending file. It is a no-op after Commit.
func (f *File) Abort() {
	if f.done {
		return
	}
	f.done = true
	f.tmp.Close()
	os.Remove(f.tmp.Name())
}

// WriteFile replaces path with data atomically.
func WriteFile(path string, data []byte) error {
	f, err := Create(path)
	if err != nil {
		return err
	}
	defer f.Abort()
	if _, err := f.Write(data); err != nil {
		return fmt.Errorf("writing %s: %w", path, err)
	}
	return f.Commit()
}

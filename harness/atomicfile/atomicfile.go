// Package atomicfile writes files so that readers see either the old content or
// the complete new content, never a half-written file: data goes to a temporary
// file in the target's directory, is synced, and is renamed over the target;
// the directory is then synced so the rename survives a crash. On any error the
// temporary file is removed and the target is left as it was.
package atomicfile

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"path/filepath"
)

// Write replaces path with what fill writes. The directory must exist. The
// file gets mode 0644.
func Write(path string, fill func(w io.Writer) error) (err error) {
	// A rename would replace a device, a directory or a link's target's
	// link: refuse anything but a regular file at the target.
	if st, err := os.Lstat(path); err == nil && !st.Mode().IsRegular() {
		return fmt.Errorf("write %s: it exists and is not a regular file (%s); choose another output path or remove whatever is in the way", path, st.Mode().Type())
	}
	dir := filepath.Dir(path)
	tmp, err := os.CreateTemp(dir, "."+filepath.Base(path)+".tmp-*")
	if err != nil {
		return fmt.Errorf("write %s: %w; check that the directory exists and is writable", path, err)
	}
	closed, renamed := false, false
	defer func() {
		if !closed {
			_ = tmp.Close()
		}
		if !renamed {
			_ = os.Remove(tmp.Name())
		}
	}()
	bw := bufio.NewWriterSize(tmp, 1<<20)
	if err := fill(bw); err != nil {
		return fmt.Errorf("write %s: %w; check free disk space", path, err)
	}
	if err := bw.Flush(); err != nil {
		return fmt.Errorf("write %s: %w; check free disk space", path, err)
	}
	if err := tmp.Chmod(0o644); err != nil {
		return fmt.Errorf("write %s: %w", path, err)
	}
	if err := tmp.Sync(); err != nil {
		return fmt.Errorf("sync %s: %w", path, err)
	}
	closed = true
	if err := tmp.Close(); err != nil {
		return fmt.Errorf("close %s: %w", path, err)
	}
	if err := os.Rename(tmp.Name(), path); err != nil {
		return fmt.Errorf("write %s: %w; remove whatever is in the way", path, err)
	}
	renamed = true
	d, err := os.Open(dir)
	if err != nil {
		return fmt.Errorf("sync directory of %s: %w", path, err)
	}
	defer d.Close()
	if err := d.Sync(); err != nil {
		return fmt.Errorf("sync directory of %s: %w", path, err)
	}
	return nil
}

// WriteFile replaces path with data.
func WriteFile(path string, data []byte) error {
	return Write(path, func(w io.Writer) error {
		_, err := w.Write(data)
		return err
	})
}

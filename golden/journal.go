package golden

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"syscall"
)

// PendingFile is the journal of a committed update whose renames may not all
// have happened yet; LockFile marks an update in progress.
const (
	PendingFile = ".update-pending"
	LockFile    = ".update-lock"
	tempPrefix  = ".golden-"
)

type renaming struct{ tmp, dst string }

// writeJournal records the renames of a committed update atomically.
func writeJournal(dir string, rs []renaming) error {
	var b bytes.Buffer
	for _, r := range rs {
		fmt.Fprintf(&b, "%s %s\n", strconv.Quote(filepath.Base(r.tmp)), strconv.Quote(filepath.Base(r.dst)))
	}
	f, err := os.CreateTemp(dir, tempPrefix+"journal-*")
	if err != nil {
		return fmt.Errorf("writing the update journal: %w", err)
	}
	name := f.Name()
	if _, err = f.Write(b.Bytes()); err == nil {
		err = f.Sync()
	}
	if cerr := f.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = os.Rename(name, filepath.Join(dir, PendingFile))
	}
	if err == nil {
		err = syncDir(dir)
	}
	if err != nil {
		os.Remove(name)
		return fmt.Errorf("writing the update journal: %w", err)
	}
	return nil
}

func syncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	return d.Sync()
}

// Recover finishes an update that was interrupted after it committed (its
// journal exists): the remaining renames are done and the journal removed.
// Without a journal it removes temporary files an interrupted update left.
// It is called by every golden operation; running it twice is harmless.
func Recover(dir string) error {
	path := filepath.Join(dir, PendingFile)
	data, err := os.ReadFile(path)
	if errors.Is(err, fs.ErrNotExist) {
		return removeStrays(dir)
	}
	if err != nil {
		return fmt.Errorf("reading %s: %w", path, err)
	}
	sc := bufio.NewScanner(bytes.NewReader(data))
	for n := 1; sc.Scan(); n++ {
		tmp, rest, err := quotedPrefix(sc.Text())
		if err != nil {
			return fmt.Errorf("%s:%d: damaged journal: %v; inspect the golden directory by hand", path, n, err)
		}
		dst, err := strconv.Unquote(strings.TrimPrefix(rest, " "))
		if err != nil || strings.ContainsAny(tmp+dst, `/\`) {
			return fmt.Errorf("%s:%d: damaged journal; inspect the golden directory by hand", path, n)
		}
		src := filepath.Join(dir, tmp)
		if _, err := os.Stat(src); errors.Is(err, fs.ErrNotExist) {
			continue // renamed before the interruption
		}
		if err := os.Rename(src, filepath.Join(dir, dst)); err != nil {
			return fmt.Errorf("finishing an interrupted golden update: %w", err)
		}
	}
	if err := syncDir(dir); err != nil {
		return err
	}
	if err := os.Remove(path); err != nil {
		return fmt.Errorf("finishing an interrupted golden update: %w", err)
	}
	if err := syncDir(dir); err != nil {
		return err
	}
	return removeStrays(dir)
}

// removeStrays deletes temporaries of updates that never committed.
func removeStrays(dir string) error {
	entries, err := os.ReadDir(dir)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	if _, err := os.Stat(filepath.Join(dir, LockFile)); err == nil && !staleLock(dir) {
		return nil // an update is running: its temporaries are not strays
	}
	for _, e := range entries {
		if strings.HasPrefix(e.Name(), tempPrefix) {
			os.Remove(filepath.Join(dir, e.Name()))
		}
	}
	return nil
}

// lock takes the directory's update lock: a file holding the owner's pid,
// created exclusively. A lock whose process is gone (a killed update) is
// taken over.
func lock(dir string) (func(), error) {
	path := filepath.Join(dir, LockFile)
	for attempt := 0; attempt < 2; attempt++ {
		f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
		if err == nil {
			fmt.Fprintf(f, "%d\n", os.Getpid())
			f.Close()
			return func() { os.Remove(path) }, nil
		}
		if !errors.Is(err, fs.ErrExist) {
			return nil, fmt.Errorf("locking the golden directory: %w", err)
		}
		if !staleLock(dir) {
			b, _ := os.ReadFile(path)
			return nil, fmt.Errorf("another golden update is running on %s (lock %s held by process %s); wait for it, or remove the lock if no such process exists", dir, path, strings.TrimSpace(string(b)))
		}
		os.Remove(path)
	}
	return nil, fmt.Errorf("could not take the lock %s", path)
}

// staleLock reports whether the lock file names a process that no longer runs.
func staleLock(dir string) bool {
	b, err := os.ReadFile(filepath.Join(dir, LockFile))
	if err != nil {
		return false
	}
	pid, err := strconv.Atoi(strings.TrimSpace(string(b)))
	if err != nil || pid <= 0 {
		return len(b) > 0 // a lock being written has no pid yet; an unreadable one is stale
	}
	return syscall.Kill(pid, 0) == syscall.ESRCH
}

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
	"time"
)

// PendingFile is the journal of a committed update whose renames may not all
// have happened yet; LockFile marks an update in progress.
const (
	PendingFile = ".update-pending"
	LockFile    = ".update-lock"
	tempPrefix  = ".golden-"
	// lockTempPrefix names a lock being written (then the writer's pid): not
	// a stray that removeStrays may delete, unless its process is gone.
	lockTempPrefix = ".update-lock-tmp-"
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
// It takes the directory's lock (waiting up to LockWait for a running
// update), so it never races an update; every golden operation calls it, and
// running it twice is harmless. A missing directory is fine.
func Recover(dir string) error {
	if _, err := os.Stat(dir); errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	unlock, err := lockWait(dir, LockWait)
	if err != nil {
		if errors.Is(err, fs.ErrPermission) {
			return nil // a read-only directory: nothing to finish or clean here
		}
		return err
	}
	defer unlock()
	return recoverLocked(dir)
}

// LockWait is how long an operation waits for a running update.
const LockWait = 30 * time.Second

// lockWait takes the lock, polling while a live process holds it.
func lockWait(dir string, wait time.Duration) (func(), error) {
	deadline := time.Now().Add(wait)
	for {
		unlock, err := lock(dir)
		if err == nil || !errors.Is(err, errLocked) || time.Now().After(deadline) {
			return unlock, err
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// recoverLocked is Recover with the lock held.
func recoverLocked(dir string) error {
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
		err = os.Rename(filepath.Join(dir, tmp), filepath.Join(dir, dst))
		if err != nil && !errors.Is(err, fs.ErrNotExist) { // not found: renamed before the interruption
			return fmt.Errorf("finishing an interrupted golden update: %w", err)
		}
	}
	if err := syncDir(dir); err != nil {
		return err
	}
	if err := os.Remove(path); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return fmt.Errorf("finishing an interrupted golden update: %w", err)
	}
	if err := syncDir(dir); err != nil {
		return err
	}
	return removeStrays(dir)
}

// removeStrays deletes temporaries of updates that never committed (the
// lock is held, so none belongs to a running update).
func removeStrays(dir string) error {
	entries, err := os.ReadDir(dir)
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		return err
	}
	for _, e := range entries {
		name := e.Name()
		switch {
		case strings.HasPrefix(name, tempPrefix):
			os.Remove(filepath.Join(dir, name))
		case strings.HasPrefix(name, lockTempPrefix):
			pidText, _, _ := strings.Cut(strings.TrimPrefix(name, lockTempPrefix), "-")
			if pid, err := strconv.Atoi(pidText); err == nil && syscall.Kill(pid, 0) == syscall.ESRCH {
				os.Remove(filepath.Join(dir, name)) // left by a process killed while locking
			}
		}
	}
	return nil
}

var errLocked = errors.New("another golden update is running")

// lock takes the directory's update lock: a file holding the owner's pid,
// written to a temporary file first and then hard-linked into place, which
// fails when the lock exists; so the lock is never seen without its pid. A
// lock whose process is gone (a killed update) is taken over.
func lock(dir string) (func(), error) {
	path := filepath.Join(dir, LockFile)
	tmp, err := os.CreateTemp(dir, fmt.Sprintf("%s%d-*", lockTempPrefix, os.Getpid()))
	if err != nil {
		return nil, fmt.Errorf("locking the golden directory: %w", err)
	}
	fmt.Fprintf(tmp, "%d\n", os.Getpid())
	tmp.Close()
	defer os.Remove(tmp.Name())
	for attempt := 0; attempt < 2; attempt++ {
		err := os.Link(tmp.Name(), path)
		if err == nil {
			return func() { os.Remove(path) }, nil
		}
		if !errors.Is(err, fs.ErrExist) {
			return nil, fmt.Errorf("locking the golden directory: %w", err)
		}
		if !staleLock(dir) {
			b, _ := os.ReadFile(path)
			return nil, fmt.Errorf("%w on %s (lock %s held by process %s); wait for it, or remove the lock if no such process exists", errLocked, dir, path, strings.TrimSpace(string(b)))
		}
		os.Remove(path)
	}
	return nil, fmt.Errorf("could not take the lock %s", path)
}

// staleLock reports whether the lock file names a process that no longer
// runs (or names none: locks are written whole, so that is damage).
func staleLock(dir string) bool {
	b, err := os.ReadFile(filepath.Join(dir, LockFile))
	if err != nil {
		return false
	}
	pid, err := strconv.Atoi(strings.TrimSpace(string(b)))
	if err != nil || pid <= 0 {
		return true
	}
	return syscall.Kill(pid, 0) == syscall.ESRCH
}

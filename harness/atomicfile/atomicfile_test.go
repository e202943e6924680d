package atomicfile

import (
	"errors"
	"io"
	"os"
	"path/filepath"
	"testing"

	"github.com/stretchr/testify/require"
)

func TestWriteReplacesOnlyOnSuccess(t *testing.T) {
	dir := t.TempDir()
	p := filepath.Join(dir, "golden.txt")
	require.NoError(t, WriteFile(p, []byte("old\n")))
	boom := errors.New("disk full")
	err := Write(p, func(w io.Writer) error {
		if _, err := w.Write([]byte("half")); err != nil {
			return err
		}
		return boom
	})
	require.ErrorIs(t, err, boom)
	require.ErrorContains(t, err, p)
	b, err := os.ReadFile(p)
	require.NoError(t, err)
	require.Equal(t, "old\n", string(b), "a failed write must leave the old content")
	require.NoError(t, WriteFile(p, []byte("new\n")))
	b, err = os.ReadFile(p)
	require.NoError(t, err)
	require.Equal(t, "new\n", string(b))
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	require.Len(t, entries, 1, "no temporary file may be left behind")
	st, err := os.Stat(p)
	require.NoError(t, err)
	require.Equal(t, os.FileMode(0o644), st.Mode().Perm())
}

func TestWriteIntoMissingDirectory(t *testing.T) {
	p := filepath.Join(t.TempDir(), "nope", "f")
	err := WriteFile(p, []byte("x"))
	require.ErrorContains(t, err, "check that the directory exists")
	require.NoDirExists(t, filepath.Dir(p))
}

func TestWriteOverADirectoryFailsCleanly(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "taken")
	require.NoError(t, os.MkdirAll(filepath.Join(target, "inside"), 0o755))
	err := WriteFile(target, []byte("x"))
	require.ErrorContains(t, err, "is not a regular file")
	entries, err := os.ReadDir(dir)
	require.NoError(t, err)
	require.Len(t, entries, 1)
}

// A target that is not a regular file (here a directory; a device or a
// symbolic link is refused the same way) is left alone.
func TestRefusesNonRegularTargets(t *testing.T) {
	dir := t.TempDir()
	target := filepath.Join(dir, "out")
	require.NoError(t, os.Mkdir(target, 0o755))
	err := WriteFile(target, []byte("x"))
	require.ErrorContains(t, err, "is not a regular file")
	link := filepath.Join(dir, "link")
	require.NoError(t, os.Symlink(filepath.Join(dir, "elsewhere"), link))
	require.ErrorContains(t, WriteFile(link, []byte("x")), "is not a regular file")
	st, err := os.Lstat(link)
	require.NoError(t, err)
	require.NotZero(t, st.Mode()&os.ModeSymlink, "the link is still a link")
}

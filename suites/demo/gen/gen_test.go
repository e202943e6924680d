package gen

import (
	"bytes"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

var update = flag.Bool("update", false, "rewrite ../data from the generator")

// The committed data under suites/demo/data is what the generator writes for
// seed 1, byte for byte. Regenerate with `go test ./suites/demo/gen -run
// TestDataIsCurrent -update` (the demo model's numbers then need re-measuring).
func TestDataIsCurrent(t *testing.T) {
	d, err := Generate(1, DefaultSizes())
	require.NoError(t, err)
	dir := filepath.Join("..", "data")
	if *update {
		require.NoError(t, WriteData(dir, d))
	}
	fresh := t.TempDir()
	require.NoError(t, WriteData(fresh, d))
	var names []string
	require.NoError(t, filepath.WalkDir(fresh, func(p string, e os.DirEntry, err error) error {
		if err == nil && !e.IsDir() {
			rel, _ := filepath.Rel(fresh, p)
			names = append(names, rel)
		}
		return err
	}))
	require.Len(t, names, 12)
	for _, n := range names {
		want, err := os.ReadFile(filepath.Join(fresh, n))
		require.NoError(t, err)
		have, err := os.ReadFile(filepath.Join(dir, n))
		require.NoError(t, err)
		require.True(t, bytes.Equal(want, have), "%s differs from the generator; run go test ./suites/demo/gen -run TestDataIsCurrent -update", n)
	}
}

func TestSplitsAreDisjointAndSized(t *testing.T) {
	s := Sizes{TrainDocs: 2000, ValidDocs: 50, HeldOutDocs: 100, WeatherDocs: 20, Items: 300, Pool: 40}
	d, err := Generate(3, s)
	require.NoError(t, err)
	train := map[string]bool{}
	for _, doc := range d.Train {
		train[doc] = true
	}
	for _, doc := range append(append([]string{}, d.HeldOut...), d.Valid...) {
		require.False(t, train[doc], "a held-out document is also a training document")
	}
	joined := strings.Join(d.Train, "")
	for _, fam := range Families() {
		require.Len(t, d.Items[fam], 300)
		require.Len(t, d.Pools[fam], 40)
		seen := map[string]bool{}
		for _, it := range append(append([]Item{}, d.Items[fam]...), d.Pools[fam]...) {
			require.False(t, seen[it.Context], "%s: context repeated across items and pool", it.ID)
			seen[it.Context] = true
			require.Len(t, it.Options, 4)
			require.Equal(t, it.Target, it.Options[it.Answer])
			opts := map[string]bool{}
			for _, o := range it.Options {
				require.True(t, strings.HasPrefix(o, " "), "%s: option %q must start with a space", it.ID, o)
				opts[o] = true
			}
			require.Len(t, opts, 4, "%s: options must differ", it.ID)
		}
		// In-context retrieval: the answer to a lookup is in its own table and
		// nowhere in the training text.
		if fam == "lookup" {
			for _, it := range d.Items[fam][:50] {
				require.Contains(t, it.Context, "="+it.Target+"\n")
				require.NotContains(t, joined, it.Context)
			}
		}
	}
	// Same seed, same data.
	again, err := Generate(3, s)
	require.NoError(t, err)
	require.Equal(t, d, again)
}

func TestAnswersAreRight(t *testing.T) {
	d, err := Generate(5, Sizes{TrainDocs: 10, Items: 50, Pool: 5})
	require.NoError(t, err)
	w := NewWorld(5)
	for _, it := range d.Items["weekday"] {
		var from, days int
		for i, day := range w.Weekdays {
			if strings.Contains(it.Context, " on "+day+",") {
				from = i
			}
		}
		for n := 1; n <= 6; n++ {
			if strings.Contains(it.Context, " "+string(rune('0'+n))+" day") {
				days = n
			}
		}
		require.Equal(t, " "+w.Weekdays[(from+days)%7], it.Target, it.Context)
	}
	for _, it := range d.Items["sum"] {
		var a, b int
		var id1 string
		_, err := fmt.Sscanf(it.Context, "At %s a parcel of %d kg and a parcel of %d kg weigh together", &id1, &a, &b)
		require.NoError(t, err, it.Context)
		require.Equal(t, " "+strconv.Itoa(a+b), it.Target)
	}
}

package gen

import (
	"regexp"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"
)

// Drills are training text: they must not carry any in-context probe
// question (an item's, a pool example's or a dev item's), their answers must
// be right by their own latest table or route, and adding them must leave
// every other split as it was.
func TestDrillsAreDisjointAndRight(t *testing.T) {
	s := Sizes{TrainDocs: 300, ValidDocs: 20, HeldOutDocs: 20, WeatherDocs: 5, Items: 200, Pool: 30, DrillDocs: 400, DevItems: 40}
	d, err := Generate(3, s)
	require.NoError(t, err)
	require.Len(t, d.Drill, 400)
	joined := strings.Join(d.Drill, "")
	for _, fam := range []string{"lookup", "next"} {
		require.Len(t, d.Dev[fam], 40)
		for _, set := range [][]Item{d.Items[fam], d.Pools[fam], d.Dev[fam]} {
			for _, it := range set {
				require.NotContains(t, joined, it.Context, "%s: a drill carries a probe question", it.ID)
			}
		}
	}
	row := regexp.MustCompile(`^- (\S+) = (\S+)$`)
	code := regexp.MustCompile(`^Code for (\S+): (\S+)$`)
	route := regexp.MustCompile(`^Route \d+: (.*)\.$`)
	after := regexp.MustCompile(`^After (\S+) comes: (\S+)$`)
	lookups, nexts := 0, 0
	for _, doc := range d.Drill {
		table, next := map[string]string{}, map[string]string{}
		for _, line := range strings.Split(doc, "\n") {
			switch {
			case line == "Depot table:":
				table = map[string]string{}
			case row.MatchString(line):
				m := row.FindStringSubmatch(line)
				table[m[1]] = m[2]
			case code.MatchString(line):
				m := code.FindStringSubmatch(line)
				require.Equal(t, table[m[1]], m[2], "drill lookup %q disagrees with the latest table", line)
				lookups++
			case route.MatchString(line):
				stops := strings.Split(route.FindStringSubmatch(line)[1], ", ")
				next = map[string]string{}
				for i := 0; i+1 < len(stops); i++ {
					next[stops[i]] = stops[i+1]
				}
			case after.MatchString(line):
				m := after.FindStringSubmatch(line)
				require.Equal(t, next[m[1]], m[2], "drill next-stop %q disagrees with its route", line)
				nexts++
			}
		}
	}
	require.Greater(t, lookups, 1000)
	require.Greater(t, nexts, 1000)

	// The other splits do not depend on the drills or the dev items.
	without := s
	without.DrillDocs, without.DevItems = 0, 0
	base, err := Generate(3, without)
	require.NoError(t, err)
	require.Equal(t, base.Train, d.Train)
	require.Equal(t, base.HeldOut, d.HeldOut)
	require.Equal(t, base.Items, d.Items)
	require.Equal(t, base.Pools, d.Pools)
}

package runner

import (
	"fmt"
	"math/rand/v2"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/suites"
)

func poolItems(n int) []suites.Item {
	var out []suites.Item
	for i := range n {
		a := i % 2
		out = append(out, suites.Item{ID: fmt.Sprintf("p%d", i), Context: fmt.Sprintf("Q%d:", i), Options: []string{" a", " b"}, Answer: &a})
	}
	return out
}

func fewShot(shots int, seed uint64, pool []suites.Item) *prepared {
	return &prepared{probe: &suites.Probe{Name: "mc", Kind: suites.Choice, Shots: shots, Seed: seed, Separator: "\n\n"}, pool: pool}
}

func TestShotsNeverIncludeTheItem(t *testing.T) {
	pool := poolItems(6)
	pp := fewShot(5, 1, pool)
	// The item shares its id with p2 and its context with p4: of 6 examples,
	// exactly 4 are eligible, and 5 shots cannot be drawn (prepare refuses
	// such a probe before it runs).
	item := suites.Item{ID: "p2", Context: "Q4:"}
	require.Equal(t, []int{0, 1, 3, 5}, eligible(pool, &item))
	pp.probe.Shots = 4
	for seed := range uint64(50) {
		pp.probe.Seed = seed
		got := shots(pp, &item)
		require.Len(t, got, 4)
		ids := map[string]bool{}
		for _, ex := range got {
			require.NotEqual(t, "p2", ex.ID)
			require.NotEqual(t, "Q4:", ex.Context)
			require.False(t, ids[ex.ID], "examples are distinct")
			ids[ex.ID] = true
		}
	}
}

func TestShotsDependOnlyOnSeedAndID(t *testing.T) {
	pool := poolItems(12)
	items := []suites.Item{{ID: "x1", Context: "A:"}, {ID: "x2", Context: "B:"}, {ID: "x3", Context: "C:"}, {ID: "x4", Context: "D:"}}
	pp := fewShot(3, 9, pool)
	want := map[string]string{}
	for i := range items {
		want[items[i].ID] = prompt(pp, &items[i])
	}
	// The prompt is the solved examples, each followed by the separator, then
	// the item's context.
	ex := shots(pp, &items[0])
	require.Equal(t, ex[0].Solved()+"\n\n"+ex[1].Solved()+"\n\n"+ex[2].Solved()+"\n\n"+"A:", want["x1"])

	r := rand.New(rand.NewPCG(1, 2))
	for range 5 {
		r.Shuffle(len(items), func(i, j int) { items[i], items[j] = items[j], items[i] })
		for i := range items {
			require.Equal(t, want[items[i].ID], prompt(pp, &items[i]), "item order must not change an item's prompt")
		}
	}
	// A copy of the item with another context but the same id draws the same
	// examples (the draw keys on the id); another id or seed draws others.
	other := suites.Item{ID: "x1", Context: "Z:"}
	require.Equal(t, strings.TrimSuffix(want["x1"], "A:"), strings.TrimSuffix(prompt(pp, &other), "Z:"))
	differs := false
	for seed := range uint64(10) {
		pp.probe.Seed = 100 + seed
		differs = differs || prompt(pp, &items[0]) != want[items[0].ID]
	}
	require.True(t, differs, "the seed changes the draw")
	pp.probe.Seed = 9
	byID := map[string]bool{}
	for _, it := range items {
		byID[want[it.ID][:strings.LastIndex(want[it.ID], "\n\n")]] = true
	}
	require.Greater(t, len(byID), 1, "different ids draw different examples")
	require.Equal(t, "A:", prompt(fewShot(0, 9, pool), &items[0]), "no shots: the context alone")
	require.Equal(t, poolItems(12), pool, "drawing does not reorder the pool")
}

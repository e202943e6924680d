package runner

import (
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/suites"
)

// Every probe of the built-in demo suite prepares on the demo model (its
// data parse, its pools are large enough, its windows fit), and every
// few-shot prompt with its longest option or its token budget fits in the
// model's positions, so no demo item is cut short at run time.
func TestDemoSuitePrepares(t *testing.T) {
	s, err := suites.LoadBuiltin("demo")
	require.NoError(t, err)
	base := openTarget(t, demoModel, 1)
	m := base.Model
	for _, p := range s.Probes {
		pp, err := prepare(s, p, m)
		require.NoError(t, err, p.Name)
		longest := 0
		for i := range pp.items {
			it := &pp.items[i]
			n := len(m.Tokenizer.EncodeForModel(prompt(pp, it)))
			switch p.Kind {
			case suites.Choice:
				for _, o := range it.Options {
					n = max(n, len(m.Tokenizer.EncodeForModel(prompt(pp, it)))+len(m.Tokenizer.Encode(o))-1)
				}
			case suites.Generation:
				n += p.MaxTokens - 1
			}
			longest = max(longest, n)
		}
		require.LessOrEqual(t, longest, m.Config.MaxPositions, p.Name)
		t.Logf("%s: %d items, longest prompt %d positions", p.Name, len(pp.items), longest)
	}
}

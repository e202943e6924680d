package runner

import (
	"errors"
	"math"
	"strings"
	"testing"

	"github.com/stretchr/testify/require"

	"sparsegate/harness/results"
	"sparsegate/suites"
)

func TestBadInputThroughRun(t *testing.T) {
	base := openTarget(t, writeModel(t, 1, nil), 2)
	choice := "format: 1\nname: bad\nprobes:\n  - name: mc\n    kind: choice\n    items: items.jsonl\n    pool: pool.jsonl\n    shots: 2\n"
	text := "format: 1\nname: bad\nprobes:\n  - name: ppl\n    kind: perplexity\n    text: text.txt\n"
	cases := []struct {
		name, yaml string
		files      map[string]string
		msgs       []string
	}{
		{"malformed JSON Lines", choice, map[string]string{"items.jsonl": itemsJSONL("a", 2) + "{\"id\": \n", "pool.jsonl": itemsJSONL("p", 3)},
			[]string{`probe "mc"`, "items.jsonl:3: not valid JSON"}},
		{"answer out of range", choice, map[string]string{"items.jsonl": `{"id":"a","context":"C","options":[" x"," y"],"answer":5}`, "pool.jsonl": itemsJSONL("p", 3)},
			[]string{`probe "mc"`, "items.jsonl:1: item \"a\": answer 5 is out of range"}},
		{"bad pool", choice, map[string]string{"items.jsonl": itemsJSONL("a", 2), "pool.jsonl": `{"id":"p","context":"C","options":[" x"]}`},
			[]string{`probe "mc"`, "pool.jsonl:1:"}},
		// p-0 has a-0's context, so it is not eligible either.
		{"shots larger than the pool", choice, map[string]string{"items.jsonl": itemsJSONL("a", 2), "pool.jsonl": itemsJSONL("p", 1)},
			[]string{`probe "mc"`, "2 shots, but the pool pool.jsonl has only 0 examples usable for item \"a-0\"", "never its own example"}},
		{"empty text", text, map[string]string{"text.txt": "  \n\n"},
			[]string{`probe "ppl"`, "text.txt is empty"}},
		{"text not UTF-8", text, map[string]string{"text.txt": "ok\xff\n"},
			[]string{`probe "ppl"`, "text.txt is not valid UTF-8 (first bad byte at offset 2)"}},
		{"window longer than the model", text + "    window: 65\n", map[string]string{"text.txt": corpus},
			[]string{`probe "ppl"`, "window 65 is longer than the model's context of 64 positions"}},
		{"choice prompt too long", "format: 1\nname: bad\nprobes:\n  - name: mc\n    kind: choice\n    items: items.jsonl\n",
			map[string]string{"items.jsonl": itemsJSONL("a", 1) + `{"id":"long","context":"` + strings.Repeat("The cat sat. ", 40) + `","options":[" a"," b"],"answer":0}`},
			[]string{`probe "mc"`, `item "long" (items.jsonl line 2): its prompt of`, "more than the model's 64"}},
		{"generation budget too long", "format: 1\nname: bad\nprobes:\n  - name: gen\n    kind: generation\n    items: items.jsonl\n    max_tokens: 60\n",
			map[string]string{"items.jsonl": itemsJSONL("a", 2)},
			[]string{`probe "gen"`, `item "a-0" (items.jsonl line 1)`, "+ max_tokens 60 needs"}},
		{"speed prompt too long", "format: 1\nname: bad\nprobes:\n  - name: sp\n    kind: speed\n    text: text.txt\n    prompt_tokens: 60\n    max_tokens: 8\n",
			map[string]string{"text.txt": corpus}, []string{`probe "sp"`, "prompt_tokens 60 + max_tokens 8 exceed the model's 64 positions"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s := writeSuite(t, c.yaml, c.files)
			r, err := Run(s, base, nil, Options{Now: fixedClock})
			require.Error(t, err)
			require.Nil(t, r)
			require.True(t, errors.Is(err, ErrInput), "%v does not wrap ErrInput", err)
			require.Contains(t, err.Error(), s.File+":4:5: ", "the error names the suite file and the probe's place")
			for _, m := range c.msgs {
				require.Contains(t, err.Error(), m)
			}
		})
	}

	s := writeSuite(t, mixedSuite, defaultFiles())
	_, err := Run(s, nil, nil, Options{})
	require.ErrorIs(t, err, ErrInput)
	_, err = Run(s, base, nil, Options{Probes: []string{"nope"}})
	require.ErrorIs(t, err, ErrInput)
	require.ErrorContains(t, err, `no probe named "nope"`)
	_, err = Run(s, base, nil, Options{Shard: results.Shard{Index: 3, Count: 2}})
	require.ErrorIs(t, err, ErrInput)
}

// A model whose weights hold a NaN makes every probe that runs fail, with
// a note, instead of passing with made-up metrics.
func TestNaNWeightsFailTheProbes(t *testing.T) {
	dir := writeModel(t, 1, func(name string, v []float32) {
		if name == "model.decoder.layers.1.fc2.weight" {
			v[3] = float32(math.NaN())
		}
	})
	base := openTarget(t, dir, 2)
	s := writeSuite(t, mixedSuite, defaultFiles())
	r := run(t, s, base, nil, Options{})
	for _, p := range r.Probes {
		switch p.Kind {
		case suites.Drift, suites.Flips:
			require.Equal(t, results.Skipped, p.Status, p.Name)
		default:
			require.Equal(t, results.Failed, p.Status, "%s: %s", p.Name, p.Note)
			require.True(t, strings.Contains(p.Note, "non-finite") || strings.Contains(p.Note, "NaN"), "%s: %q", p.Name, p.Note)
			require.Empty(t, p.Metrics, p.Name)
			require.Empty(t, p.Items, p.Name)
		}
	}
	require.NoError(t, r.Check())

	// As a candidate against a clean base: drift fails too, and flips, whose
	// sources failed, says so.
	clean := openTarget(t, writeModel(t, 1, nil), 2)
	r = run(t, s, clean, base, Options{})
	for _, p := range r.Probes {
		require.Equal(t, results.Failed, p.Status, "%s: %s", p.Name, p.Note)
	}
	require.Contains(t, r.Probe("flips").Note, `probe "mc" did not run (error)`)
}

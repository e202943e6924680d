package main

import (
	"testing"

	"github.com/stretchr/testify/require"
)

// A checkpoint candidate (pruned or otherwise edited weights) is bisected
// over the layer components whose weights differ from the base: each step
// takes those units from the candidate and the rest from the base
// (engine.Hybrid). Here layer 2's up projection has its signs flipped: the
// only unit that differs, and the one bisect names.
func TestBisectPrunedCheckpointCandidate(t *testing.T) {
	suite := writeSuite(t, bisectSuite)
	gdir := recordGolden(t, suite, abs(t, demoModelSrc))
	bad := corruptCopy(t, demoModelSrc, "model.decoder.layers.2.fc1.weight")
	code, out, errs := sparsegate(t, "bisect", "--suite", suite, "--candidate", bad, "--base", abs(t, demoModelSrc),
		"--golden", gdir, "--probe", "ppl", "--no-cache")
	require.Equal(t, 0, code, out+errs)
	require.Contains(t, out, "1 sparse units")
	require.Contains(t, out, "layer 2 mlp mask alone")
	// A checkpoint candidate needs its base named.
	code, _, errs = sparsegate(t, "bisect", "--suite", suite, "--candidate", bad, "--golden", gdir, "--probe", "ppl", "--no-cache")
	require.Equal(t, 2, code)
	require.Contains(t, errs, "needs --base")
}

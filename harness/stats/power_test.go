package stats

import (
	"math"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// Connor's paired sample-size formula (R. J. Connor, Biometrics 43(1), 1987,
// pp. 207-211), worked by hand with z_{0.975} = 1.959964, z_{0.8} = 0.841621,
// z_{0.9} = 1.281552 (normal table):
//
// Case 1: psi = 0.2, delta = 0.1, alpha = 0.05, power = 0.8
//
//	sqrt(0.2) = 0.447214, sqrt(0.2 - 0.01) = sqrt(0.19) = 0.435890
//	1.959964 * 0.447214 = 0.876524;  0.841621 * 0.435890 = 0.366855
//	(0.876524 + 0.366855)^2 / 0.01 = 1.243379^2 / 0.01 = 1.545990 / 0.01 = 154.60 -> 155
//
// Case 2: psi = 0.3, delta = 0.05, alpha = 0.05, power = 0.9
//
//	sqrt(0.3) = 0.547723, sqrt(0.3 - 0.0025) = sqrt(0.2975) = 0.545436
//	1.959964 * 0.547723 = 1.073517;  1.281552 * 0.545436 = 0.699000
//	(1.073517 + 0.699000)^2 / 0.0025 = 1.772517^2 / 0.0025 = 3.141816 / 0.0025 = 1256.7 -> 1257
func TestPairedSampleSizeHandCases(t *testing.T) {
	n, err := PairedSampleSize(0.1, 0.2, 0.05, 0.8)
	require.NoError(t, err)
	assert.Equal(t, 155, n)
	n, err = PairedSampleSize(-0.1, 0.2, 0.05, 0.8)
	require.NoError(t, err)
	assert.Equal(t, 155, n, "the sign of delta does not matter")
	n, err = PairedSampleSize(0.05, 0.3, 0.05, 0.9)
	require.NoError(t, err)
	assert.Equal(t, 1257, n)

	// delta = psi (all discordant pairs go one way): sqrt(psi - psi^2) term.
	// psi = 0.5: (1.959964*0.707107 + 0.841621*0.5)^2 / 0.25
	//          = (1.385904 + 0.420811)^2 / 0.25 = 3.264219 / 0.25 = 13.06 -> 14
	n, err = PairedSampleSize(0.5, 0.5, 0.05, 0.8)
	require.NoError(t, err)
	assert.Equal(t, 14, n)
}

func TestPairedSampleSizeErrors(t *testing.T) {
	for _, c := range [][4]float64{
		{0, 0.2, 0.05, 0.8},          // delta = 0
		{0.3, 0.2, 0.05, 0.8},        // |delta| > psi
		{-0.3, 0.2, 0.05, 0.8},       // |delta| > psi
		{0.1, 1.2, 0.05, 0.8},        // psi > 1
		{math.NaN(), 0.2, 0.05, 0.8}, // NaN
		{0.1, 0.2, 0, 0.8},           // alpha = 0
		{0.1, 0.2, 0.05, 1},          // power = 1
		{0.1, 0.2, 1, 0.8},           // alpha = 1
	} {
		_, err := PairedSampleSize(c[0], c[1], c[2], c[3])
		assert.Error(t, err, "%v", c)
	}
	_, err := PairedSampleSize(1e-12, 0.5, 0.05, 0.8)
	assert.ErrorContains(t, err, "too many to count")
}

// Round trip: the smallest detectable delta for the pair count that Connor's
// formula asks for is at most that delta, and asks for the same pair count.
func TestMinDetectableRoundTrip(t *testing.T) {
	for _, c := range []struct{ delta, psi, alpha, power float64 }{
		{0.1, 0.2, 0.05, 0.8},
		{0.05, 0.3, 0.05, 0.9},
		{0.02, 0.1, 0.01, 0.8},
		{0.3, 0.4, 0.05, 0.5},
		{0.5, 0.5, 0.05, 0.8},
	} {
		n, err := PairedSampleSize(c.delta, c.psi, c.alpha, c.power)
		require.NoError(t, err)
		d, ok := MinDetectable(n, c.psi, c.alpha, c.power)
		require.True(t, ok, "%+v n=%d", c, n)
		assert.LessOrEqual(t, d, c.delta, "%+v", c)
		assert.InDelta(t, c.delta, d, 0.1*c.delta, "%+v", c)
		back, err := PairedSampleSize(d, c.psi, c.alpha, c.power)
		require.NoError(t, err)
		assert.Equal(t, n, back, "%+v", c)
		if n > 1 {
			// One pair fewer cannot detect delta.
			d1, _ := MinDetectable(n-1, c.psi, c.alpha, c.power)
			assert.Greater(t, d1, d)
		}
	}
	// Case 1 by hand (see TestPairedSampleSizeHandCases): 155 pairs reach
	// slightly below 0.1 because 154.6 was rounded up.
	d, ok := MinDetectable(155, 0.2, 0.05, 0.8)
	require.True(t, ok)
	assert.InDelta(t, 0.0999, d, 0.0005)
}

// MinDetectable falls as n grows. With psi = 0.2, delta = psi needs
// (1.959964*0.447214 + 0.841621*0.4)^2 / 0.04 = 36.8 pairs (by hand), so the
// scan starts at 40.
func TestMinDetectableMonotoneAndLimits(t *testing.T) {
	prev := math.Inf(1)
	for n := 40; n <= 20000; n = n*5/4 + 1 {
		d, ok := MinDetectable(n, 0.2, 0.05, 0.8)
		require.True(t, ok, "n=%d", n)
		require.Less(t, d, prev, "n=%d", n)
		prev = d
	}
	// psi = 0.1, delta = psi needs (1.959964*0.316228 + 0.841621*0.3)^2/0.01
	// = (0.619795 + 0.252486)^2 / 0.01 = 76.09 pairs by hand; 5 pairs are too few.
	d, ok := MinDetectable(5, 0.1, 0.05, 0.8)
	assert.False(t, ok)
	assert.Equal(t, 0.1, d)
	_, ok = MinDetectable(77, 0.1, 0.05, 0.8)
	assert.True(t, ok)
	_, ok = MinDetectable(76, 0.1, 0.05, 0.8)
	assert.False(t, ok)
	d, ok = MinDetectable(100, 0, 0.05, 0.8)
	assert.False(t, ok)
	assert.Equal(t, 0.0, d)
	_, ok = MinDetectable(0, 0.2, 0.05, 0.8)
	assert.False(t, ok)
	require.Panics(t, func() { MinDetectable(10, 1.5, 0.05, 0.8) })
	require.Panics(t, func() { MinDetectable(10, 0.2, 0, 0.8) })
	require.Panics(t, func() { MinDetectable(10, 0.2, 0.05, 0.3) })
}

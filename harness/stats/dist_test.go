package stats

import (
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

// Critical values from the standard normal and chi-square tables (common
// practice, no source): the 95% two-sided normal point 1.959963984540054 and
// its square 3.841458820694124, the chi-square(1) 5% point. The digits of all
// normal points here were taken from scipy.stats.norm.ppf (scipy 1.10.1).
func TestChiSquare1SFAndNormalQuantile(t *testing.T) {
	assert.InDelta(t, 0.05, ChiSquare1SF(3.841458820694124), 1e-14)
	assert.InDelta(t, 1.959963984540054, NormalQuantile(0.975), 1e-14)
	assert.InDelta(t, -1.959963984540054, NormalQuantile(0.025), 1e-14)
	// One-sided 5% and 0.1% points, and the 80%/90% power points.
	assert.InDelta(t, 1.6448536269514722, NormalQuantile(0.95), 1e-13)
	assert.InDelta(t, 0.8416212335729143, NormalQuantile(0.8), 1e-13)
	assert.InDelta(t, 1.2815515655446004, NormalQuantile(0.9), 1e-13)
	assert.InDelta(t, -3.090232306167813, NormalQuantile(0.001), 1e-12)
	assert.Equal(t, 0.0, NormalQuantile(0.5))
	// chi-square(1) tail is the two-sided normal tail of sqrt(x).
	assert.InDelta(t, 0.01, ChiSquare1SF(2.5758293035489004*2.5758293035489004), 1e-14)
	assert.Equal(t, 1.0, ChiSquare1SF(0))
	assert.Equal(t, 1.0, ChiSquare1SF(-2))

	for _, p := range []float64{0, 1, -0.1, 1.5} {
		require.PanicsWithValue(t, "stats: NormalQuantile probability outside (0, 1)", func() { NormalQuantile(p) })
	}
}

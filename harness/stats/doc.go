// Package stats holds the significance tests behind golden-run comparison:
// whether a candidate build's drop in accuracy, or rise in perplexity, against
// the recorded (golden) run is larger than chance, and whether a probe has
// enough items to detect a drop worth caring about.
//
// Accuracy comparisons are paired: every probe item is scored by both runs, so
// only the discordant items count (McNemar's test, exact or chi-square).
// Perplexity comparisons resample whole windows of both runs together (paired
// bootstrap) so the correlation between the runs is kept. Every function is
// deterministic: the same inputs give bit-identical results.
//
// # Formulas
//
// Binomial distribution, X ~ Binomial(n, p), q = 1 − p:
//
//	P(X = i)   = C(n, i) pⁱ qⁿ⁻ⁱ, evaluated as
//	             exp(δ(n) − δ(i) − δ(n−i) − D(i, np) − D(n−i, nq)) / √(2π i (n−i)/n)
//	δ(m)       = ln m! − (m+½) ln m + m − ½ ln 2π      (Stirling error; lgamma for m ≤ 15, series above)
//	D(x, μ)    = x ln(x/μ) + μ − x                       (deviance; series when x ≈ μ)
//	P(X ≤ k)   = Σ_{i ≤ k} P(X = i)   when k < np,  else 1 − Σ_{i > k} P(X = i)
//
// The smaller tail is always the one summed, walking away from the mode until
// terms fall below 1e-17 of the sum, so the cost is O(√n) terms, not O(n).
//
// Exact two-sided binomial test with p = ½ (the doubled smaller tail):
//
//	p-value = min(1, 2 · P(X ≤ min(k, n−k)))
//
// McNemar's test on B (right in golden, wrong in candidate) and C (the reverse):
//
//	statistic   = (B − C)² / (B + C)
//	corrected   = (max(|B − C| − 1, 0))² / (B + C)
//	ChiSquareP  = P(χ²₁ ≥ corrected)
//	ExactP      = two-sided binomial p-value of B in B + C trials, p = ½
//
// Chi-square with one degree of freedom and the standard normal:
//
//	P(χ²₁ ≥ x) = erfc(√(x/2))
//	Φ⁻¹(p)     = −√2 · erfc⁻¹(2p)
//
// Paired bootstrap with R resamples of n units, sorted resampled statistics
// v[0] ≤ … ≤ v[R−1] and level L:
//
//	lo = v[⌊(1−L)/2 · R⌋]        hi = v[⌈(1+L)/2 · R⌉ − 1]
//	P  = min(1, 2 · min(#{v ≤ 0}, #{v ≥ 0}) / R)
//
// Ratio difference with resample weights w (how often each unit was drawn):
//
//	RatioDiff = Σ wᵢ numBᵢ / Σ wᵢ denBᵢ − Σ wᵢ numAᵢ / Σ wᵢ denAᵢ
//
// Paired-proportion sample size (Connor's formula), δ = p₁₀ − p₀₁,
// ψ = p₁₀ + p₀₁, z_x = Φ⁻¹(x):
//
//	n = ⌈ (z_{1−α/2} √ψ + z_{power} √(ψ − δ²))² / δ² ⌉
//
// MinDetectable inverts the same formula for δ by bisection.
package stats

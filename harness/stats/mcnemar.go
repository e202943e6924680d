package stats

// A McNemar is the outcome of McNemar's test on paired binary outcomes.
type McNemar struct {
	B, C       int     // discordant counts: B = right in golden, wrong in candidate (regressions); C = the reverse
	Statistic  float64 // chi-square statistic (B-C)^2/(B+C) without continuity correction (0 when B+C == 0)
	ChiSquareP float64 // p-value of the chi-square version WITH continuity correction (max(|B-C|-1, 0))^2/(B+C), 1 dof
	ExactP     float64 // exact two-sided binomial p-value on the B+C discordant pairs
}

// McNemarTest runs McNemar's test on the discordant counts b (right in
// golden, wrong in candidate) and c (the reverse). With no discordant pairs
// both p-values are 1. The continuity correction never moves the statistic
// past zero, so b == c gives ChiSquareP = 1. It panics with
// "stats: negative count" when b < 0 or c < 0.
func McNemarTest(b, c int) McNemar {
	if b < 0 || c < 0 {
		panic("stats: negative count")
	}
	r := McNemar{B: b, C: c, ChiSquareP: 1, ExactP: 1}
	n := b + c
	if n == 0 {
		return r
	}
	d := float64(b - c)
	if d < 0 {
		d = -d
	}
	r.Statistic = d * d / float64(n)
	cd := max(d-1, 0)
	r.ChiSquareP = ChiSquare1SF(cd * cd / float64(n))
	r.ExactP = BinomialTwoSided(b, n)
	return r
}

package stats

import "math"

// Wilson returns the Wilson score interval (Wilson 1927) for a binomial
// proportion with successes out of n trials at normal quantile z (1.96
// for 95%):
//
//	centre = (p̂ + z²/2n) / (1 + z²/n)
//	half   = z/(1 + z²/n) · sqrt(p̂(1−p̂)/n + z²/4n²)
//
// clamped to [0, 1]. Unlike the Wald interval it stays inside [0, 1] and
// keeps close to its nominal coverage for small n and for proportions near
// 0 or 1 (Newcombe 1998, "Two-sided confidence intervals for the single
// proportion"). n ≤ 0 gives (0, 1): no trials, no information; successes
// outside 0..n are clamped into it.
func Wilson(successes, n int, z float64) (lo, hi float64) {
	if n <= 0 {
		return 0, 1
	}
	s := min(max(successes, 0), n)
	nf := float64(n)
	p := float64(s) / nf
	z2 := z * z
	den := 1 + z2/nf
	centre := (p + z2/(2*nf)) / den
	half := z / den * math.Sqrt(p*(1-p)/nf+z2/(4*nf*nf))
	lo, hi = max(0, centre-half), min(1, centre+half)
	// Exact ends: no successes puts the lower end at 0, all successes the
	// upper end at 1 (the formula gives these up to rounding).
	if s == 0 {
		lo = 0
	}
	if s == n {
		hi = 1
	}
	return lo, hi
}

package stats

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// SignedRank is the outcome of the Wilcoxon signed-rank test.
type SignedRank struct {
	// N is the number of pairs with a non-zero difference (zeros are
	// dropped, Wilcoxon's own rule).
	N int
	// Statistic is min(W+, W−), the smaller of the rank sums of the
	// positive and the negative differences (scipy's two-sided statistic).
	Statistic float64
	// WPlus is the rank sum of the positive differences x − y.
	WPlus float64
	// P is the two-sided p-value.
	P float64
	// Exact is true when P comes from the exact null distribution (no
	// ties, no zeros, N ≤ MaxExactSignedRank); otherwise it is the normal
	// approximation with the tie correction and no continuity correction.
	Exact bool
}

// MaxExactSignedRank is the largest N for which SignedRankTest uses the
// exact distribution (scipy.stats.wilcoxon's "auto" rule).
const MaxExactSignedRank = 50

// SignedRankTest runs the two-sided Wilcoxon signed-rank test (Wilcoxon
// 1945, "Individual comparisons by ranking methods", Biometrics Bulletin
// 1) on the paired samples x and y (x[i] and y[i] on the same seed), of
// H0 "the differences are symmetric about zero". It agrees with
// scipy.stats.wilcoxon(x, y, zero_method="wilcox", correction=False) with
// method "exact" when Exact and "approx" otherwise. With no non-zero
// difference P is 1.
func SignedRankTest(x, y []float64) (SignedRank, error) {
	if len(x) != len(y) {
		return SignedRank{}, fmt.Errorf("signed-rank test: %d against %d scores: not paired", len(x), len(y))
	}
	var d []float64
	for i := range x {
		v := x[i] - y[i]
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return SignedRank{}, fmt.Errorf("signed-rank test: pair %d differs by %v", i, v)
		}
		if v != 0 {
			d = append(d, v)
		}
	}
	n := len(d)
	zeros := len(x) - n
	res := SignedRank{N: n, P: 1}
	if n == 0 {
		return res, nil
	}
	// Ranks of |d|, average ranks for ties.
	idx := make([]int, n)
	for i := range idx {
		idx[i] = i
	}
	slices.SortFunc(idx, func(a, b int) int { return cmp.Compare(math.Abs(d[a]), math.Abs(d[b])) })
	ties := false
	var tieTerm float64 // Σ t(t²−1)
	for i := 0; i < n; {
		j := i + 1
		for j < n && math.Abs(d[idx[j]]) == math.Abs(d[idx[i]]) {
			j++
		}
		rank := float64(i+j+1) / 2 // mean of ranks i+1..j
		for k := i; k < j; k++ {
			if d[idx[k]] > 0 {
				res.WPlus += rank
			}
		}
		if t := float64(j - i); t > 1 {
			ties = true
			tieTerm += t * (t*t - 1)
		}
		i = j
	}
	nf := float64(n)
	total := nf * (nf + 1) / 2
	res.Statistic = math.Min(res.WPlus, total-res.WPlus)
	if !ties && zeros == 0 && n <= MaxExactSignedRank {
		res.Exact = true
		res.P = exactSignedRankP(n, int(res.WPlus))
		return res, nil
	}
	mn := nf * (nf + 1) / 4
	se := math.Sqrt((nf*(nf+1)*(2*nf+1) - 0.5*tieTerm) / 24)
	z := (res.Statistic - mn) / se
	res.P = math.Min(1, 2*stdNormal.CDF(-math.Abs(z)))
	return res, nil
}

// exactSignedRankP is the two-sided exact p-value of W+ = w among n
// untied ranks: 2·min(P(W ≤ w), P(W ≥ w)), 1 at the centre. The null
// distribution counts the subsets of 1..n by their sum.
func exactSignedRankP(n, w int) float64 {
	max := n * (n + 1) / 2
	cnt := make([]float64, max+1)
	cnt[0] = 1
	for k := 1; k <= n; k++ {
		for s := max; s >= k; s-- {
			cnt[s] += cnt[s-k]
		}
	}
	if w == max/2 {
		return 1
	}
	var lo, hi, tot float64
	for s, c := range cnt {
		tot += c
		if s <= w {
			lo += c
		}
		if s >= w {
			hi += c
		}
	}
	return math.Min(1, 2*math.Min(lo, hi)/tot)
}

package stats

import (
	"math"
	"testing"
)

// TestWilsonWorked checks the Wilson score interval against the worked
// examples of Newcombe 1998 ("Two-sided confidence intervals for the
// single proportion: comparison of seven methods", Statistics in Medicine
// 17, Table II, method 3), 95% level, four decimals (values from memory;
// they agree with scipy.stats.binomtest(k, n).proportion_ci(method="wilson")).
func TestWilsonWorked(t *testing.T) {
	for _, c := range []struct {
		k, n   int
		lo, hi float64
	}{
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0, 0.1611},
		{1, 29, 0.0061, 0.1718},
	} {
		lo, hi := Wilson(c.k, c.n, 1.959964)
		if math.Abs(lo-c.lo) > 5e-5 || math.Abs(hi-c.hi) > 5e-5 {
			t.Errorf("Wilson(%d, %d) = [%.4f, %.4f], want [%.4f, %.4f]", c.k, c.n, lo, hi, c.lo, c.hi)
		}
	}
}

func TestWilsonEdges(t *testing.T) {
	if lo, hi := Wilson(0, 0, 1.96); lo != 0 || hi != 1 {
		t.Errorf("n=0: [%v, %v], want [0, 1]", lo, hi)
	}
	if lo, hi := Wilson(10, 10, 1.96); hi != 1 || !(lo > 0.69 && lo < 0.73) {
		// 10/10 at 95%: lower end 0.7225 (the formula by hand).
		t.Errorf("10/10: [%v, %v]", lo, hi)
	}
	// Symmetry: k of n and n-k of n mirror each other.
	lo1, hi1 := Wilson(3, 17, 1.96)
	lo2, hi2 := Wilson(14, 17, 1.96)
	if math.Abs(lo1-(1-hi2)) > 1e-12 || math.Abs(hi1-(1-lo2)) > 1e-12 {
		t.Errorf("not symmetric: [%v, %v] vs [%v, %v]", lo1, hi1, lo2, hi2)
	}
}

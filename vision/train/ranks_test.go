package train

import (
	"math"
	"testing"
)

// TestCentredRanksWorkedExample: Salimans et al. 2017 map ranks to
// [−0.5, 0.5]: ranks/(n−1) − 0.5. For fitness (3, −1, 10, 2) the ranks
// are (2, 0, 3, 1), so the shaped values are (1/6, −1/2, 1/2, −1/6)
// (worked by hand).
func TestCentredRanksWorkedExample(t *testing.T) {
	dst := make([]float64, 4)
	CentredRanks(dst, []float64{3, -1, 10, 2}, nil)
	want := []float64{1.0 / 6, -0.5, 0.5, -1.0 / 6}
	for i := range want {
		if math.Abs(dst[i]-want[i]) > 1e-15 {
			t.Fatalf("got %v, want %v", dst, want)
		}
	}
	// Ties share the mean rank: (5, 5, 1) → ranks (1.5, 1.5, 0) → (0.25, 0.25, −0.5).
	dst = dst[:3]
	CentredRanks(dst, []float64{5, 5, 1}, nil)
	for i, w := range []float64{0.25, 0.25, -0.5} {
		if math.Abs(dst[i]-w) > 1e-15 {
			t.Fatalf("ties: got %v", dst)
		}
	}
	// Invariant to any monotone transform of the fitness.
	a, b := make([]float64, 5), make([]float64, 5)
	f := []float64{0.3, -7, 2, 100, 1}
	g := make([]float64, 5)
	for i, v := range f {
		g[i] = math.Exp(v / 10)
	}
	CentredRanks(a, f, nil)
	CentredRanks(b, g, nil)
	sum := 0.0
	for i := range a {
		sum += a[i]
		if a[i] != b[i] {
			t.Fatalf("not invariant to monotone maps: %v vs %v", a, b)
		}
	}
	if math.Abs(sum) > 1e-15 {
		t.Fatalf("sum %v, want 0", sum)
	}
}

package choose

import (
	"math"
	"testing"

	"tilebench/internal/seeds"
	"tilebench/vision/stats"
)

// Type-I error by simulation: the non-inferiority test at the margin's
// boundary (true difference = margin, the two arms on shared seeds)
// rejects at most α + Monte-Carlo slack, at n = 10 (BCa), 30 and 100.
// The sizes fit CI; -short trims them.
func TestNonInferiorityTypeI(t *testing.T) {
	trials := 400
	if testing.Short() {
		trials = 120
	}
	const B = 500
	for _, n := range []int{10, 30, 100} {
		reject := 0
		for tr := 0; tr < trials; tr++ {
			r := seeds.NewRand(seeds.DeriveSeed(99, uint64(n), uint64(tr)))
			a, bb := make([]float64, n), make([]float64, n)
			for i := 0; i < n; i++ {
				s := 0.2 * r.NormFloat64() // the seed's difficulty, shared
				a[i] = 1 + s + 0.05*r.NormFloat64()
				bb[i] = 1 - DefaultMargin + s + 0.05*r.NormFloat64()
			}
			bs := stats.Bootstrap{Resamples: B, Seed: uint64(tr)}
			c, err := NonInferiority{Bootstrap: bs, Statistic: stats.StatMean}.Test(stats.Arms{{a}, {bb}}, 0)
			if err != nil {
				t.Fatal(err)
			}
			if c[1].NonInferior {
				reject++
			}
		}
		typeI := float64(reject) / float64(trials)
		// Binomial slack: 3 standard errors of a proportion at the nominal
		// rate (common practice), plus 0.03 for the bootstrap's own
		// small-sample bias at n = 10.
		se := math.Sqrt(DefaultAlpha * (1 - DefaultAlpha) / float64(trials))
		t.Logf("n=%d: non-inferiority type-I error %.3f (%d trials)", n, typeI, trials)
		if typeI > DefaultAlpha+3*se+0.03 {
			t.Errorf("n=%d: type-I error %.3f above α = %.2f", n, typeI, DefaultAlpha)
		}
	}
}

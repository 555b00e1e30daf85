package stats_test

import (
	"fmt"

	"tilebench/vision/stats"
)

func ExampleIQM() {
	fmt.Println(stats.IQM([]float64{1, 2, 3, 4, 5, 6, 7, 8}))
	// Output: 4.5
}

func ExampleBootstrap_Summarize() {
	// Two strata (say two seed blocks) of episode returns.
	s := stats.Strata{{10, 12, 11, 13, 9, 12}, {20, 22, 19, 21, 23, 20}}
	sum, err := stats.Bootstrap{Seed: 1}.Summarize(s)
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Printf("n=%d IQM=%.3g resamples=%d lo<iqm<hi: %v\n", sum.N, sum.IQM.Value, sum.IQM.Resamples,
		sum.IQM.Lo < sum.IQM.Value && sum.IQM.Value < sum.IQM.Hi)
	// Output: n=12 IQM=16 resamples=2000 lo<iqm<hi: true
}

func ExampleBootstrap_Retention() {
	clean := stats.Strata{{100, 104, 98, 101, 99, 103, 97, 102}}
	stressed := stats.Strata{{52, 49, 55, 47, 50, 51, 53, 48}}
	r, _ := stats.Bootstrap{Seed: 3}.Retention(stressed, clean, stats.StatIQM)
	fmt.Printf("retention %.2f, interval inside (0.45, 0.55): %v\n", r.Value, r.Lo > 0.45 && r.Hi < 0.55)
	// Output: retention 0.50, interval inside (0.45, 0.55): true
}

func ExampleWilson() {
	// 81 successes in 263 trials (Newcombe 1998's first example), 95%.
	lo, hi := stats.Wilson(81, 263, 1.959964)
	fmt.Printf("%.4f %.4f\n", lo, hi)
	// Output: 0.2553 0.3662
}

func ExampleBootstrap_SequenceMean() {
	// Three short sequences: too few to resample whole, so the
	// moving-block bootstrap runs over their frames.
	seqs := stats.Sequences{{0, 0.1, 0.2}, {0.4, 0.3}, {0.1, 0.1, 0.2, 0.2}}
	e, method, _ := stats.Bootstrap{Resamples: 1000, Seed: 1}.SequenceMean(seqs)
	fmt.Printf("%.3f %s\n", e.Value, method)
	// Output: 0.178 moving-block bootstrap
}

func ExampleBootstrap_PairedDiff() {
	// Clean and stressed returns on the same six seeds (index i is one
	// seed in both): the seeds differ a lot, the stress costs about 5.
	clean := stats.Strata{{120, 80, 150, 60, 100, 130}}
	stressed := stats.Strata{{114, 76, 146, 54, 95, 124}}
	d, _ := stats.Bootstrap{Seed: 1}.PairedDiff(clean, stressed, stats.StatMean)
	u, _ := stats.Bootstrap{Seed: 1}.Diff(clean, stressed, stats.StatMean)
	fmt.Printf("difference %.2f (%s), paired interval narrower: %v\n", d.Value, d.Method, d.Hi-d.Lo < (u.Hi-u.Lo)/5)
	// Output: difference 5.17 (BCa), paired interval narrower: true
}

func ExampleBootstrap_Normalized() {
	// Returns can be negative: the idle floor scores -100 on every seed.
	stressed := stats.Strata{{-40, -20, 0, -30, -10, -25, -5, -15}}
	clean := stats.Strata{{40, 60, 80, 50, 70, 45, 75, 55}}
	floor := stats.Strata{{-100, -100, -100, -100, -100, -100, -100, -100}}
	r, _ := stats.Bootstrap{Seed: 2}.Normalized(stressed, clean, floor, stats.StatIQM)
	fmt.Printf("normalised retention %.3f\n", r.Value)
	// Output: normalised retention 0.520
}

func ExampleSignedRankTest() {
	// The "exact n=7" case of testdata/ref/paired_ref.py: scipy.stats.wilcoxon
	// gives statistic 3 and p = 10/128 = 0.078125.
	x := []float64{3.1, 4.2, 1.5, 6.0, 2.2, 5.5, 7.3}
	y := []float64{2.0, 4.0, 2.5, 3.0, 1.0, 5.0, 4.0}
	r, _ := stats.SignedRankTest(x, y)
	fmt.Printf("W=%v p=%.4f exact=%v\n", r.Statistic, r.P, r.Exact)
	// Output: W=3 p=0.0781 exact=true
}

func ExampleCVaR() {
	v, _ := stats.CVaR([]float64{10, 9, 8, 7, 6, 5, 4, 3, 2, 1}, 0.25)
	fmt.Println(v)
	// Output: 1.8
}

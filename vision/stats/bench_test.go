package stats

import "testing"

func BenchmarkBootstrapIQM(b *testing.B) {
	s := normals(1, 3, 30, 100, 10) // 90 episodes in 3 strata
	bs := Bootstrap{Resamples: 2000}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := bs.CI(s, StatIQM); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkBootstrapMean(b *testing.B) {
	s := normals(1, 3, 30, 100, 10)
	bs := Bootstrap{Resamples: 2000}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := bs.CI(s, StatMean); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSummarize(b *testing.B) {
	s := normals(1, 3, 30, 100, 10)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := (Bootstrap{}).Summarize(s); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkProbImprovementCI(b *testing.B) {
	x, y := normals(1, 3, 30, 100, 10), normals(2, 3, 30, 95, 10)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := (Bootstrap{}).ProbImprovementCI(x, y); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkPairedDiffIQM(b *testing.B) {
	x, y := paired(1, 3, 30, 1, 0.2, 0.05, 1), paired(1, 3, 30, 0.95, 0.2, 0.05, 2)
	bs := Bootstrap{Resamples: 2000}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := bs.PairedDiff(x, y, StatIQM); err != nil {
			b.Fatal(err)
		}
	}
}

// BCa below 20 seeds adds the jackknife.
func BenchmarkNormalizedBCa(b *testing.B) {
	x, r, f := paired(1, 1, 12, 0.5, 0.2, 0.05, 1), paired(1, 1, 12, 1, 0.2, 0.05, 2), paired(1, 1, 12, 0, 0.01, 0.01, 3)
	bs := Bootstrap{Resamples: 2000}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := bs.Normalized(x, r, f, StatIQM); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSignedRank(b *testing.B) {
	x, y := paired(1, 1, 40, 1, 0.2, 0.05, 1), paired(1, 1, 40, 0.95, 0.2, 0.05, 2)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := SignedRankTest(x[0], y[0]); err != nil {
			b.Fatal(err)
		}
	}
}

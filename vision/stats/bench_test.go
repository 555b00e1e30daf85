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

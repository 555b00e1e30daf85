package probe

import (
	"path/filepath"
	"testing"

	"tilebench/patch"
	"tilebench/vision/study"
)

// BenchmarkUnit runs one unit (clean and transformed pass) over a
// 64-frame sequence with a fresh meanpool net; allocations are per unit
// (the record's per-frame arrays), not per frame.
func BenchmarkUnit(b *testing.B) {
	dir := b.TempDir()
	rec := recording(b, dir, 64, 64, 48)
	p := plan(b, Config{In: rec, Policy: "fresh", Family: "meanpool", ActionSpace: "continuous:2",
		Axes: study.Axes{Scramble: study.Axis{"full"}, Occlude: study.Axis{"random:0.3"}}, Resamples: 100})
	src, err := openSource(p)
	if err != nil {
		b.Fatal(err)
	}
	defer src.Close()
	r, err := newRunner(p, src, 8, Policies(p, filepath.Join(dir, "logs")))
	if err != nil {
		b.Fatal(err)
	}
	defer r.close()
	c := 0
	for i, x := range p.Cells {
		if !x.Clean() {
			c = i
		}
	}
	pipe, err := patch.NewPipeline(r.grid, p.Cells[c].Spec())
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		rec := Record{Cell: c, Sequence: 0, Params: p.Cells[c], PolicySeed: 1, PipeSeed: 2}
		if err := r.unit(&rec, pipe); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/128, "ns/frame-pass")
}

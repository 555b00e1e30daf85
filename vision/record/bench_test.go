package record

import (
	"path/filepath"
	"testing"
)

// BenchmarkRecordPaddle records one expert episode of paddle per
// iteration (2000 steps, frames streamed to disk); its allocations
// (files, buffers, manifest) number far fewer than its steps.
func BenchmarkRecordPaddle(b *testing.B) {
	g, grid := setup(b, "paddle", 20)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		if _, err := Run(Config{Game: g, Grid: grid, Episodes: 1, Dir: filepath.Join(b.TempDir(), "r")}); err != nil {
			b.Fatal(err)
		}
	}
}

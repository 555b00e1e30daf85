package paddle

import (
	"testing"

	"tilebench/games/internal/gametest"
)

// BenchmarkPaddleStep measures one step plus one render of the 120×80
// field with the expert playing (its cost included).
func BenchmarkPaddleStep(b *testing.B) { gametest.BenchStep(b, newGame(b, "")) }

// BenchmarkPaddleReset measures the start of an episode.
func BenchmarkPaddleReset(b *testing.B) {
	g := newGame(b, "drifter")
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		g.Reset(uint64(i))
	}
}

// BenchmarkPaddleFrameCopy is the yardstick: a plain copy of one 120×80
// RGBA frame's bytes.
func BenchmarkPaddleFrameCopy(b *testing.B) { gametest.BenchFrameCopy(b, Width, Height) }

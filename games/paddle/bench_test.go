package paddle

import (
	"image"
	"os"
	"testing"
	"time"

	"tilebench/games/internal/gametest"
	"tilebench/vision/stats"
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

// TestPaddleSpeed times single steps (expert, step and render) interleaved
// with a plain copy of one frame and checks the target: a median of at
// most 5 µs, 200 000 steps per second on one core. The median of single
// steps is steadier than a benchmark's mean on a busy machine. Runs only
// with TILEBENCH_SPEED=1.
func TestPaddleSpeed(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to time single steps")
	}
	g := newGame(t, "")
	cp := make([]byte, Width*Height*4)
	var copies []float64
	ms := gametest.StepTimes(g, 20001, func(img *image.RGBA) {
		s := time.Now()
		copy(cp, img.Pix)
		copies = append(copies, float64(time.Since(s)))
	})
	mc := stats.Median(copies)
	t.Logf("speed: step+render %.2f µs (%.0f steps/s), frame copy %.2f µs, ratio %.1f", ms/1e3, 1e9/ms, mc/1e3, ms/mc)
	if ms > 5000 {
		t.Errorf("step+render median %.2f µs: want ≤ 5 µs (200 000 steps/s)", ms/1e3)
	}
}

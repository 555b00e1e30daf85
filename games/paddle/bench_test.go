package paddle

import (
	"image"
	"os"
	"sort"
	"testing"
	"time"

	"tilebench/games"
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
	g.Reset(games.HeldOut(0))
	img := image.NewRGBA(image.Rect(0, 0, Width, Height))
	cp := make([]byte, len(img.Pix))
	act := make([]float64, 1)
	const n = 20001
	step, copies := make([]float64, 0, n), make([]float64, 0, n)
	for i := 0; i < n; i++ {
		s := time.Now()
		g.Expert().Act(act)
		if st, _ := g.Step(act); st.Done {
			g.Reset(games.HeldOut(i))
		}
		g.Render(img)
		step = append(step, float64(time.Since(s)))
		s = time.Now()
		copy(cp, img.Pix)
		copies = append(copies, float64(time.Since(s)))
	}
	sort.Float64s(step)
	sort.Float64s(copies)
	ms, mc := step[n/2], copies[n/2]
	t.Logf("speed: step+render %.2f µs (%.0f steps/s), frame copy %.2f µs, ratio %.1f", ms/1e3, 1e9/ms, mc/1e3, ms/mc)
	if ms > 5000 {
		t.Errorf("step+render median %.2f µs: want ≤ 5 µs (200 000 steps/s)", ms/1e3)
	}
}

package drive

import (
	"image"
	"os"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/games/internal/gametest"
	"tilebench/vision/stats"
)

// BenchmarkDriveStep measures one step plus one render at 112×80 with the
// expert driving (the expert's own cost included).
func BenchmarkDriveStep(b *testing.B) {
	g, err := New(games.Setup{})
	if err != nil {
		b.Fatal(err)
	}
	gametest.BenchStep(b, g)
}

// BenchmarkDriveFrameCopy is the yardstick: a plain copy of one 112×80
// RGBA frame's bytes.
func BenchmarkDriveFrameCopy(b *testing.B) { gametest.BenchFrameCopy(b, DefaultWidth, DefaultHeight) }

// BenchmarkDriveRender measures the render alone.
func BenchmarkDriveRender(b *testing.B) {
	g, err := New(games.Setup{})
	if err != nil {
		b.Fatal(err)
	}
	g.Reset(games.HeldOut(0))
	act := make([]float64, 2)
	for i := 0; i < 100; i++ {
		g.Expert().Act(act)
		g.Step(act)
	}
	dst := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		g.Render(dst)
	}
}

// BenchmarkDriveReset measures starting an episode: generating the
// circuit and clearing the last episode's road from the world image (the road is drawn lazily by Render).
func BenchmarkDriveReset(b *testing.B) {
	g, err := New(games.Setup{})
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		g.Reset(games.HeldOut(i % 50))
	}
}

// BenchmarkDriveResetRender is a reset and the episode's first frame,
// which draws the stretches of road in view.
func BenchmarkDriveResetRender(b *testing.B) {
	g, err := New(games.Setup{})
	if err != nil {
		b.Fatal(err)
	}
	dst := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		g.Reset(games.HeldOut(i % 50))
		g.Render(dst)
	}
}

// TestDriveSpeed times single steps (expert, step and render) and single
// episode starts (reset and the first frame, which draws the road in
// view) and checks the targets by their medians, steadier than a
// benchmark's mean on a busy machine: a step at most 20 µs (50 000 steps
// per second on one core) and a start at most 0.3 ms. Runs only with
// TILEBENCH_SPEED=1.
func TestDriveSpeed(t *testing.T) {
	if os.Getenv("TILEBENCH_SPEED") != "1" {
		t.Skip("set TILEBENCH_SPEED=1 to time single steps")
	}
	g := newGame(t, "")
	img := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
	start := make([]float64, 0, 501)
	for i := range cap(start) {
		s := time.Now()
		g.Reset(games.HeldOut(i % 50))
		g.Render(img)
		start = append(start, float64(time.Since(s)))
	}
	mr := stats.Median(start)
	ms := gametest.StepTimes(g, 20001, nil)
	t.Logf("speed: step+render %.2f µs (%.0f steps/s), reset+first frame %.0f µs", ms/1e3, 1e9/ms, mr/1e3)
	if ms > 20000 {
		t.Errorf("step+render median %.2f µs: want ≤ 20 µs (50 000 steps/s)", ms/1e3)
	}
	if mr > 300000 {
		t.Errorf("reset+first frame median %.0f µs: want ≤ 300 µs", mr/1e3)
	}
}

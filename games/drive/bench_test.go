package drive

import (
	"image"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
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

package drive

import (
	"image"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
)

// BenchmarkDriveStep measures one step plus one render at 96×96 with the
// expert driving (the expert's own cost included).
func BenchmarkDriveStep(b *testing.B) {
	g, err := New(games.Options{})
	if err != nil {
		b.Fatal(err)
	}
	gametest.BenchStep(b, g)
}

// BenchmarkDriveFrameCopy is the yardstick: a plain copy of one 96×96
// RGBA frame's bytes.
func BenchmarkDriveFrameCopy(b *testing.B) { gametest.BenchFrameCopy(b, DefaultSize, DefaultSize) }

// BenchmarkDriveRender measures the render alone.
func BenchmarkDriveRender(b *testing.B) {
	g, err := New(games.Options{})
	if err != nil {
		b.Fatal(err)
	}
	g.Reset(games.HeldOut(0))
	act := make([]float64, 3)
	for i := 0; i < 100; i++ {
		g.Expert().Act(act)
		g.Step(act)
	}
	dst := image.NewRGBA(image.Rect(0, 0, DefaultSize, DefaultSize))
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		g.Render(dst)
	}
}

// BenchmarkDriveReset measures starting an episode: generating the
// circuit and rasterising the world image once.
func BenchmarkDriveReset(b *testing.B) {
	g, err := New(games.Options{})
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		g.Reset(games.HeldOut(i % 50))
	}
}

package drive

import (
	"image"
	"testing"

	"tilebench/games"
)

// BenchmarkDriveStep measures one step plus one render at 96×96 with the
// expert driving (the expert's own cost included).
func BenchmarkDriveStep(b *testing.B) {
	g, err := New(games.Options{})
	if err != nil {
		b.Fatal(err)
	}
	g.Reset(games.HeldOut(0))
	dst := image.NewRGBA(image.Rect(0, 0, DefaultSize, DefaultSize))
	act := make([]float64, 3)
	ex := g.Expert()
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		ex.Act(act)
		st, _ := g.Step(act)
		g.Render(dst)
		if st.Done {
			b.StopTimer()
			g.Reset(games.HeldOut(0))
			b.StartTimer()
		}
	}
}

// BenchmarkDriveFrameCopy is the yardstick: a plain copy of one 96×96
// RGBA frame's bytes.
func BenchmarkDriveFrameCopy(b *testing.B) {
	src := make([]byte, DefaultSize*DefaultSize*4)
	dst := make([]byte, len(src))
	b.ReportAllocs()
	b.SetBytes(int64(len(src)))
	for i := 0; i < b.N; i++ {
		copy(dst, src)
	}
}

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

package paddle

import (
	"image"
	"testing"

	"tilebench/games"
)

// BenchmarkPaddleStep measures one step plus one render of the 84×84
// field with the expert playing (its cost included).
func BenchmarkPaddleStep(b *testing.B) {
	g := newGame(b, "")
	g.Reset(games.HeldOut(0))
	dst := image.NewRGBA(image.Rect(0, 0, Size, Size))
	act := make([]float64, 1)
	ex := g.Expert()
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		ex.Act(act)
		st, _ := g.Step(act)
		g.Render(dst)
		if st.Done {
			g.Reset(games.HeldOut(0))
		}
	}
}

// BenchmarkPaddleFrameCopy is the yardstick: a plain copy of one 84×84
// RGBA frame's bytes.
func BenchmarkPaddleFrameCopy(b *testing.B) {
	src := make([]byte, Size*Size*4)
	dst := make([]byte, len(src))
	b.ReportAllocs()
	b.SetBytes(int64(len(src)))
	for i := 0; i < b.N; i++ {
		copy(dst, src)
	}
}

package patch

import (
	"image"
	"testing"
)

// The benchmark frame: 96×96 RGB (opaque RGBA), patch 8, float32 tokens.
func benchSetup(b testing.TB) (*Tokenizer, *image.RGBA, *TokenSet) {
	g := mustGrid(b, GridConfig{Width: 96, Height: 96, PatchW: 8})
	return NewTokenizer(g), randomRGBA(96, 96, 1), NewTokenSet(g.N(), g.D())
}

func benchTokenize(b *testing.B, img image.Image) {
	tk, _, ts := benchSetup(b)
	b.SetBytes(int64(len(ts.Data) * 4))
	b.ReportAllocs()
	for b.Loop() {
		if err := tk.Tokenize(img, ts); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkTokenizeRGBA is the speed target: 96×96×3 → 144 tokens of 192
// float32; SetBytes counts output bytes, to compare with the copy baseline.
func BenchmarkTokenizeRGBA(b *testing.B) {
	_, f, _ := benchSetup(b)
	benchTokenize(b, f)
}

func BenchmarkTokenizeNRGBA(b *testing.B) {
	_, f, _ := benchSetup(b)
	benchTokenize(b, &image.NRGBA{Pix: f.Pix, Stride: f.Stride, Rect: f.Rect})
}

func BenchmarkTokenizeGray(b *testing.B) {
	_, f, _ := benchSetup(b)
	gr := image.NewGray(f.Rect)
	for i := range gr.Pix {
		gr.Pix[i] = f.Pix[4*i]
	}
	g := mustGrid(b, GridConfig{Width: 96, Height: 96, PatchW: 8, Channels: 1})
	tk, ts := NewTokenizer(g), NewTokenSet(g.N(), g.D())
	b.SetBytes(int64(len(ts.Data) * 4))
	b.ReportAllocs()
	for b.Loop() {
		if err := tk.Tokenize(gr, ts); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkTokenizeYCbCr(b *testing.B) {
	benchTokenize(b, image.NewYCbCr(image.Rect(0, 0, 96, 96), image.YCbCrSubsampleRatio420))
}

// BenchmarkTokenizeCopyBaseline copies as many bytes as Tokenize writes
// (144·192 float32 = 110 592 bytes) with the builtin copy.
func BenchmarkTokenizeCopyBaseline(b *testing.B) {
	_, _, ts := benchSetup(b)
	src := make([]float32, len(ts.Data))
	b.SetBytes(int64(len(ts.Data) * 4))
	b.ReportAllocs()
	for b.Loop() {
		copy(ts.Data, src)
	}
}

func BenchmarkAssembleRGBA(b *testing.B) {
	tk, f, ts := benchSetup(b)
	if err := tk.Tokenize(f, ts); err != nil {
		b.Fatal(err)
	}
	out := image.NewRGBA(f.Rect)
	b.ReportAllocs()
	for b.Loop() {
		if err := tk.Assemble(ts, out); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkPipelineApply: full scramble, a new permutation every step,
// random:0.25 occlusion, on the 96×96 patch-8 frame.
func BenchmarkPipelineApply(b *testing.B) {
	tk, f, src := benchSetup(b)
	if err := tk.Tokenize(f, src); err != nil {
		b.Fatal(err)
	}
	p := mustPipe(b, tk.Grid(), Spec{Scramble: "full", Every: 1, Occlude: "random:0.25"})
	p.Reset(1)
	dst := NewTokenSet(p.Capacity(), src.D)
	var rec FrameRecord
	b.ReportAllocs()
	t := 0
	for b.Loop() {
		if err := p.Apply(t, src, dst, &rec); err != nil {
			b.Fatal(err)
		}
		t++
	}
}

// BenchmarkTokenizeLuma: the RGBA frame to one-channel (BT.601 luma)
// tokens.
func BenchmarkTokenizeLuma(b *testing.B) {
	_, f, _ := benchSetup(b)
	g := mustGrid(b, GridConfig{Width: 96, Height: 96, PatchW: 8, Channels: 1})
	tk, ts := NewTokenizer(g), NewTokenSet(g.N(), g.D())
	b.SetBytes(int64(len(ts.Data) * 4))
	b.ReportAllocs()
	for b.Loop() {
		if err := tk.Tokenize(f, ts); err != nil {
			b.Fatal(err)
		}
	}
}

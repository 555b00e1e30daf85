//go:build amd64 && !purego

package patch

import (
	"image"
	"image/color"
	"testing"
)

// The AVX-512 frame path (patch width 8, even cell count) gives
// float32(b)/255 (Go's correctly rounded division) for every byte in every
// channel and pixel position, the same bits as the AVX2 frame path.
func TestAVX512FrameExhaustive(t *testing.T) {
	if !haveSIMD || !haveAVX512 {
		t.Skip("no AVX-512 VBMI on this machine")
	}
	defer func(v bool) { haveAVX512 = v }(haveAVX512)
	// 256 columns: every byte meets every pixel position of a 16-pixel
	// step, in R, G and B over the rows (x, x+85, x+170 mod 256).
	f := image.NewRGBA(image.Rect(0, 0, 256, 16))
	for y := 0; y < 16; y++ {
		for x := 0; x < 256; x++ {
			f.SetRGBA(x, y, color.RGBA{uint8(x + 16*y), uint8(x + 85 + 16*y), uint8(x + 170 + 16*y), uint8(x ^ 0x5a)})
		}
	}
	for _, ph := range []int{1, 3, 8} {
		g := mustGrid(t, GridConfig{Width: 256, Height: 16, PatchW: 8, PatchH: ph, Fill: 0.25})
		haveAVX512 = true
		a := tokenizeAll(t, g, f)
		haveAVX512 = false
		b := tokenizeAll(t, g, f)
		if !equalF32(a, b) {
			t.Fatalf("patch 8x%d: AVX-512 and AVX2 paths differ", ph)
		}
		ts := &TokenSet{N: g.N(), D: g.D(), Data: a}
		for i := 0; i < g.N(); i++ {
			r := g.Rect(g.Cell(i))
			tok := ts.Token(i)
			for y := 0; y < ph; y++ {
				if r.Min.Y+y >= 16 {
					continue
				}
				for x := 0; x < 8; x++ {
					px := f.RGBAAt(r.Min.X+x, r.Min.Y+y)
					for c, v := range []uint8{px.R, px.G, px.B} {
						if got := tok[(y*8+x)*3+c]; got != float32(v)/255 {
							t.Fatalf("patch 8x%d token %d: byte %d gave %v, want %v", ph, i, v, got, float32(v)/255)
						}
					}
				}
			}
		}
	}
}

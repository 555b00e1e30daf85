package patch

import (
	"bytes"
	"image"
	"testing"
)

// randomRGBA returns a w×h opaque frame of random bytes from seed.
func randomRGBA(w, h int, seed uint64) *image.RGBA {
	im := image.NewRGBA(image.Rect(0, 0, w, h))
	r := NewRand(seed)
	for i := range im.Pix {
		if i%4 == 3 {
			im.Pix[i] = 255
		} else {
			im.Pix[i] = uint8(r.UintN(256))
		}
	}
	return im
}

func mustGrid(t testing.TB, cfg GridConfig) *Grid {
	t.Helper()
	g, err := NewGrid(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return g
}

// Assemble(Tokenize(f)) must give f back byte for byte when the patch
// divides the frame.
func TestRoundTripRGBA(t *testing.T) {
	for _, cfg := range []GridConfig{
		{Width: 96, Height: 96, PatchW: 8},
		{Width: 30, Height: 24, PatchW: 6, PatchH: 4},
		{Width: 16, Height: 16, PatchW: 16},
	} {
		g := mustGrid(t, cfg)
		tk := NewTokenizer(g)
		f := randomRGBA(cfg.Width, cfg.Height, 3)
		ts := NewTokenSet(g.N(), g.D())
		if err := tk.Tokenize(f, ts); err != nil {
			t.Fatal(err)
		}
		back := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
		if err := tk.Assemble(ts, back); err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(back.Pix, f.Pix) {
			t.Errorf("%v: round trip differs", g)
		}
	}
}

package patch

import (
	"bytes"
	"image"
	"image/color"
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

// hidden hides an image's concrete type, forcing the generic path.
type hidden struct{ image.Image }

func tokenizeAll(t *testing.T, g *Grid, img image.Image) []float32 {
	t.Helper()
	ts := NewTokenSet(g.N(), g.D())
	if err := NewTokenizer(g).Tokenize(img, ts); err != nil {
		t.Fatal(err)
	}
	return ts.Data
}

// Every fast path agrees with the generic path (image.Image.At, as
// image/draw reads it) on frames whose bounds do not start at 0.
func TestFastPathsAgree(t *testing.T) {
	const w, h = 21, 14
	r := NewRand(5)
	rect := image.Rect(3, 2, 3+w, 2+h)
	rgba := image.NewRGBA(rect)
	for i := 0; i < len(rgba.Pix); i += 4 {
		a := uint8(r.UintN(256))
		if i%3 == 0 {
			a = 255
		}
		rgba.Pix[i+3] = a
		for c := 0; c < 3; c++ {
			rgba.Pix[i+c] = uint8(r.UintN(uint(a) + 1)) // valid premultiplied
		}
	}
	nrgba := image.NewNRGBA(rect)
	for i := range nrgba.Pix {
		nrgba.Pix[i] = uint8(r.UintN(256))
		if i%4 == 3 {
			nrgba.Pix[i] = 255
		}
	}
	gray := image.NewGray(rect)
	for i := range gray.Pix {
		gray.Pix[i] = uint8(r.UintN(256))
	}
	var yccs []image.Image
	for i, ratio := range []image.YCbCrSubsampleRatio{image.YCbCrSubsampleRatio444, image.YCbCrSubsampleRatio422, image.YCbCrSubsampleRatio420,
		image.YCbCrSubsampleRatio440, image.YCbCrSubsampleRatio411, image.YCbCrSubsampleRatio410, image.YCbCrSubsampleRatio420} {
		rc := rect
		if i == 6 {
			rc = image.Rect(-3, -5, -3+w, -5+h) // negative origin: chroma index by division
		}
		y := image.NewYCbCr(rc, ratio)
		for _, p := range [][]uint8{y.Y, y.Cb, y.Cr} {
			for i := range p {
				p[i] = uint8(r.UintN(256))
			}
		}
		yccs = append(yccs, y)
	}
	pal := image.NewPaletted(rect, nil)
	for i := 0; i < 40; i++ {
		pal.Palette = append(pal.Palette, color.RGBA{uint8(r.UintN(256)), uint8(r.UintN(256)), uint8(r.UintN(256)), 255})
	}
	for i := range pal.Pix {
		pal.Pix[i] = uint8(r.UintN(40))
	}
	images := append([]image.Image{rgba, nrgba, gray, pal}, yccs...)
	// A subimage whose Pix does not start at the frame's first pixel.
	big := image.NewRGBA(image.Rect(0, 0, w+9, h+7))
	for i := range big.Pix {
		big.Pix[i] = uint8(r.UintN(256))
	}
	images = append(images, big.SubImage(image.Rect(5, 4, 5+w, 4+h)))

	for _, cfg := range []GridConfig{
		{Width: w, Height: h, PatchW: 4, Channels: 3, Fill: 0.5},
		{Width: w, Height: h, PatchW: 4, Channels: 1},
		{Width: w, Height: h, PatchW: 5, PatchH: 3, StrideX: 2, StrideY: 2, Channels: 3, Edge: EdgeCrop},
		{Width: w, Height: h, PatchW: 6, StrideX: 4, Channels: 1, Edge: EdgePad, Fill: 1},
	} {
		g := mustGrid(t, cfg)
		for _, img := range images {
			fast := tokenizeAll(t, g, img)
			generic := tokenizeAll(t, g, hidden{img})
			if !equalF32(fast, generic) {
				t.Errorf("%T on %v: fast path differs from generic path", img, g)
			}
		}
	}
}

// NRGBA frames give their stored (un-premultiplied) values, whatever the
// alpha.
func TestNRGBAStoredValues(t *testing.T) {
	im := image.NewNRGBA(image.Rect(0, 0, 2, 1))
	copy(im.Pix, []uint8{200, 100, 50, 0, 10, 20, 30, 128})
	g := mustGrid(t, GridConfig{Width: 2, Height: 1, PatchW: 1})
	got := tokenizeAll(t, g, im)
	want := []float32{200. / 255, 100. / 255, 50. / 255, 10. / 255, 20. / 255, 30. / 255}
	if !equalF32(got, want) {
		t.Fatalf("got %v, want %v", got, want)
	}
}

// Padding fills with Fill; cropping drops the remainder; overlapping
// tiles share pixels.
func TestEdgesAndOverlap(t *testing.T) {
	f := randomRGBA(10, 7, 2)
	pad := mustGrid(t, GridConfig{Width: 10, Height: 7, PatchW: 4, Fill: 0.75})
	if pad.Cols != 3 || pad.Rows != 2 || pad.OutW != 12 || pad.OutH != 8 {
		t.Fatalf("pad grid %v", pad)
	}
	v := tokenizeAll(t, pad, f)
	last := v[(pad.N()-1)*pad.D():]
	// Token (1,2) covers x 8..11, y 4..7: pixel (3,3) of it is (11,7), padding.
	if last[(3*4+3)*3] != 0.75 || last[0] != unit[f.Pix[f.PixOffset(8, 4)]] {
		t.Fatalf("pad values wrong: %v %v", last[(3*4+3)*3], last[0])
	}
	crop := mustGrid(t, GridConfig{Width: 10, Height: 7, PatchW: 4, Edge: EdgeCrop})
	if crop.Cols != 2 || crop.Rows != 1 || crop.OutW != 8 || crop.OutH != 4 {
		t.Fatalf("crop grid %v", crop)
	}
	if _, err := NewGrid(GridConfig{Width: 10, Height: 7, PatchW: 4, Edge: EdgeStrict}); err == nil {
		t.Fatal("strict edge accepted a remainder")
	}
	ov := mustGrid(t, GridConfig{Width: 10, Height: 7, PatchW: 4, StrideX: 2, StrideY: 3, Edge: EdgeCrop})
	v = tokenizeAll(t, ov, f)
	// Token 0 pixel (2,0) is token 1 pixel (0,0).
	if v[2*3] != v[ov.D()] {
		t.Fatal("overlapping tokens do not share pixels")
	}
}

// Overlapping tokens are averaged by Assemble; with identical data the
// average is the frame itself. Cells without a token come out black.
func TestAssembleOverlapAndMissing(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 12, Height: 12, PatchW: 4, StrideX: 2, StrideY: 2})
	tk, f, ts := tokensOf(t, g, 8)
	out := image.NewRGBA(image.Rect(0, 0, 12, 12))
	if err := tk.Assemble(ts, out); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(out.Pix, f.Pix) {
		t.Fatal("overlapping assemble differs from the frame")
	}
	// Two tokens over the same pixel with values 0 and 1 average to 128.
	g2 := mustGrid(t, GridConfig{Width: 4, Height: 2, PatchW: 2, Channels: 1})
	ts2 := NewTokenSet(3, g2.D())
	ts2.N = 2
	fillValues(ts2.Token(0), 0)
	fillValues(ts2.Token(1), 1)
	ts2.Pos[0], ts2.Pos[1] = Pos{0, 0}, Pos{0, 0}
	out2 := image.NewRGBA(image.Rect(0, 0, 4, 2))
	if err := NewTokenizer(g2).Assemble(ts2, out2); err != nil {
		t.Fatal(err)
	}
	if out2.Pix[0] != 128 || out2.Pix[3] != 255 || out2.Pix[4*2] != 0 {
		t.Fatalf("average/missing wrong: %v", out2.Pix[:12])
	}
}

func TestTokenizeErrors(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 8, Height: 8, PatchW: 4})
	tk := NewTokenizer(g)
	if err := tk.Tokenize(randomRGBA(9, 8, 1), NewTokenSet(g.N(), g.D())); err == nil {
		t.Error("wrong frame size accepted")
	}
	if err := tk.Tokenize(randomRGBA(8, 8, 1), NewTokenSet(g.N()-1, g.D())); err == nil {
		t.Error("short token set accepted")
	}
	bad := &image.RGBA{Pix: make([]uint8, 10), Stride: 32, Rect: image.Rect(0, 0, 8, 8)}
	if err := tk.Tokenize(bad, NewTokenSet(g.N(), g.D())); err == nil {
		t.Error("short pixel buffer accepted")
	}
	if err := tk.Assemble(NewTokenSet(g.N(), g.D()), image.NewRGBA(image.Rect(0, 0, 4, 4))); err == nil {
		t.Error("wrong assemble size accepted")
	}
}

// Steady state allocates nothing.
func TestTokenizeNoAllocs(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 96, Height: 96, PatchW: 8})
	tk, f, ts := tokensOf(t, g, 1)
	out := image.NewRGBA(image.Rect(0, 0, 96, 96))
	gr := image.NewGray(f.Rect)
	ycc := image.NewYCbCr(f.Rect, image.YCbCrSubsampleRatio420)
	for _, img := range []image.Image{f, gr, ycc} {
		if n := testing.AllocsPerRun(20, func() { _ = tk.Tokenize(img, ts) }); n != 0 {
			t.Errorf("Tokenize %T: %v allocations", img, n)
		}
	}
	if n := testing.AllocsPerRun(20, func() { _ = tk.Assemble(ts, out) }); n != 0 {
		t.Errorf("Assemble: %v allocations", n)
	}
}

func TestCoveredGrid(t *testing.T) {
	for _, cfg := range []GridConfig{
		{Width: 30, Height: 22, PatchW: 6},
		{Width: 30, Height: 22, PatchW: 6, Edge: EdgeCrop},
		{Width: 31, Height: 20, PatchW: 5, PatchH: 4, StrideX: 3, StrideY: 2},
	} {
		g := mustGrid(t, cfg)
		c := g.Covered()
		if c.Cols != g.Cols || c.Rows != g.Rows || c.OutW != g.OutW || c.OutH != g.OutH || c.Width != g.OutW {
			t.Fatalf("%v covered as %v", g, c)
		}
	}
	if _, err := NewGrid(GridConfig{Width: 40000, Height: 2, PatchW: 1}); err == nil {
		t.Fatal("40000 columns accepted")
	}
}

// Covered agrees with NewGrid on the covered size.
func TestCoveredMatchesNewGrid(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 31, Height: 20, PatchW: 5, PatchH: 4, StrideX: 3, StrideY: 2, Fill: 0.5})
	c := g.Covered()
	n, err := NewGrid(c.GridConfig)
	if err != nil || *n != *c {
		t.Fatalf("covered %v, NewGrid %v (%v)", c, n, err)
	}
}

// The SIMD path (where the CPU has one) and the portable path give the
// same bits, for patch widths with and without a remainder of 4.
func TestSIMDAgreesWithPortable(t *testing.T) {
	if !haveSIMD {
		t.Skip("no SIMD path on this machine")
	}
	defer func(v bool) { haveSIMD = v }(haveSIMD)
	for _, pw := range []int{1, 3, 4, 5, 6, 8, 12, 16} {
		for _, edge := range []Edge{EdgePad, EdgeCrop} {
			ph := 2 + pw%3
			g := mustGrid(t, GridConfig{Width: 50, Height: 34, PatchW: pw, PatchH: ph, Edge: edge, Fill: 0.5})
			f := randomRGBA(50, 34, uint64(pw))
			haveSIMD = true
			a := tokenizeAll(t, g, f)
			haveSIMD = false
			b := tokenizeAll(t, g, f)
			if !equalF32(a, b) {
				t.Fatalf("patch %dx%d %v: SIMD and portable paths differ", pw, ph, edge)
			}
		}
	}
}

// The SIMD path gives float32(b)/255 exactly for every byte value in every
// channel position.
func TestSIMDExhaustive(t *testing.T) {
	f := image.NewRGBA(image.Rect(0, 0, 256, 4))
	for y := 0; y < 4; y++ {
		for x := 0; x < 256; x++ {
			f.SetRGBA(x, y, color.RGBA{uint8(x), uint8(255 - x), uint8(x*7 + y), 255})
		}
	}
	for _, pw := range []int{4, 8, 16} {
		g := mustGrid(t, GridConfig{Width: 256, Height: 4, PatchW: pw, PatchH: 4})
		got := tokenizeAll(t, g, f)
		ts := &TokenSet{N: g.N(), D: g.D(), Data: got}
		for i := 0; i < g.N(); i++ {
			r := g.Rect(g.Cell(i))
			tok := ts.Token(i)
			for y := 0; y < 4; y++ {
				for x := 0; x < pw; x++ {
					px := f.RGBAAt(r.Min.X+x, y)
					for c, b := range []uint8{px.R, px.G, px.B} {
						if v := tok[(y*pw+x)*3+c]; v != float32(b)/255 {
							t.Fatalf("patch %d: byte %d gave %v, want %v", pw, b, v, float32(b)/255)
						}
					}
				}
			}
		}
	}
}

// luma's float64 product gives float32(n)/255000 for every reachable and
// unreachable sum n = 299R+587G+114B in 0..255000.
func TestLumaProductExact(t *testing.T) {
	for n := 0; n <= 255000; n++ {
		if float32(float64(n)*(1.0/255000)) != float32(n)/255000 {
			t.Fatalf("sum %d: product route differs from division", n)
		}
	}
	if luma(255, 255, 255) != 1 || luma(0, 0, 0) != 0 {
		t.Fatal("luma endpoints")
	}
}

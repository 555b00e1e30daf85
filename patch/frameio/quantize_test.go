package frameio

import (
	"bytes"
	"image"
	"image/color"
	"image/gif"
	"io"
	"math/rand/v2"
	"testing"
)

// gifRoundTrip writes frames through a GIFWriter and decodes the file
// with the stdlib's image/gif, checking that every frame came back with
// the writer's delay.
func gifRoundTrip(t testing.TB, frames []image.Image, dither bool) ([]byte, []*image.RGBA) {
	t.Helper()
	w := &GIFWriter{Delay: 3, Dither: dither}
	for _, f := range frames {
		if err := w.Add(f); err != nil {
			t.Fatal(err)
		}
	}
	var b bytes.Buffer
	if err := w.Encode(&b); err != nil {
		t.Fatal(err)
	}
	g, err := gif.DecodeAll(bytes.NewReader(b.Bytes()))
	if err != nil {
		t.Fatalf("image/gif cannot decode the GIF: %v", err)
	}
	if len(g.Image) != len(frames) {
		t.Fatalf("%d frames decoded, %d written", len(g.Image), len(frames))
	}
	out := make([]*image.RGBA, len(g.Image))
	for i, p := range g.Image {
		if g.Delay[i] != w.Delay {
			t.Fatalf("frame %d: delay %d in the GIF, %d written", i, g.Delay[i], w.Delay)
		}
		out[i] = cloneRGBA(p)
	}
	return b.Bytes(), out
}

// maxChannelError is the largest difference in any colour channel
// between two equal-sized opaque frames.
func maxChannelError(a, b *image.RGBA) int {
	worst := 0
	for y := 0; y < a.Rect.Dy(); y++ {
		for x := 0; x < a.Rect.Dx(); x++ {
			i, j := a.PixOffset(a.Rect.Min.X+x, a.Rect.Min.Y+y), b.PixOffset(b.Rect.Min.X+x, b.Rect.Min.Y+y)
			for k := range 3 {
				worst = max(worst, abs(int(a.Pix[i+k])-int(b.Pix[j+k])))
			}
		}
	}
	return worst
}

func abs(v int) int {
	if v < 0 {
		return -v
	}
	return v
}

// randomColors is n distinct opaque colours from a seeded stream.
func randomColors(n int, seed uint64) []color.RGBA {
	rng := rand.New(rand.NewPCG(seed, 1))
	seen := map[color.RGBA]bool{}
	var out []color.RGBA
	for len(out) < n {
		c := color.RGBA{uint8(rng.UintN(256)), uint8(rng.UintN(256)), uint8(rng.UintN(256)), 0xff}
		if !seen[c] {
			seen[c] = true
			out = append(out, c)
		}
	}
	return out
}

// TestGIFExactRoundTrip: a sequence of exactly 256 distinct, scattered
// colours, spread over frames of three pixel layouts, comes back from
// image/gif's decoder pixel for pixel, dithered or not.
func TestGIFExactRoundTrip(t *testing.T) {
	cols := randomColors(MaxGIFColors, 3)
	rng := rand.New(rand.NewPCG(4, 5))
	var frames []image.Image
	var want []*image.RGBA
	for f := range 3 {
		m := image.NewRGBA(image.Rect(0, 0, 23, 17))
		for y := range 17 {
			for x := range 23 {
				// Every colour appears in frame 0; the others pick at random.
				c := cols[(y*23+x)%len(cols)]
				if f > 0 {
					c = cols[rng.IntN(len(cols))]
				}
				m.SetRGBA(x, y, c)
			}
		}
		want = append(want, m)
		switch f {
		case 1: // NRGBA, drawn from a sub-image with a non-zero origin
			n := image.NewNRGBA(image.Rect(5, 7, 28, 24))
			for y := range 17 {
				for x := range 23 {
					n.Set(5+x, 7+y, m.At(x, y))
				}
			}
			frames = append(frames, n)
		case 2: // an RGBA sub-image
			big := image.NewRGBA(image.Rect(0, 0, 40, 30))
			sub := big.SubImage(image.Rect(9, 4, 32, 21)).(*image.RGBA)
			for y := range 17 {
				for x := range 23 {
					sub.SetRGBA(9+x, 4+y, m.RGBAAt(x, y))
				}
			}
			frames = append(frames, sub)
		default:
			frames = append(frames, m)
		}
	}
	for _, dither := range []bool{false, true} {
		_, got := gifRoundTrip(t, frames, dither)
		for i := range got {
			if e := maxChannelError(got[i], want[i]); e != 0 {
				t.Fatalf("dither %v: frame %d differs by up to %d in a channel", dither, i, e)
			}
		}
	}
}

// gradient is a frame of smooth colours: red along x, green along y,
// blue on the diagonal, shifted by t — far more than 256 colours.
func gradient(w, h, t int) *image.RGBA {
	m := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := range h {
		for x := range w {
			m.SetRGBA(x, y, color.RGBA{uint8((x*255/(w-1) + t) % 256), uint8(y * 255 / (h - 1)), uint8((x + y + 3*t) * 255 / (w + h + 9*3)), 0xff})
		}
	}
	return m
}

// TestGIFAdaptivePalette: on a smooth sequence of several thousand
// colours the palette has 256 entries, drawn from the frames' own
// colours' range, and the largest error in any channel holds a bound
// (28 levels: 256 boxes sharing a colour solid about 255×255×200 wide
// are about 37 levels on a side, and a pixel lies within about half a
// side of its box's mean, so about 19, plus room for uneven boxes;
// measured 23); dithering keeps the frame's mean colour closer than
// nearest-colour mapping does (measured 2.4 against 4.4 levels summed
// over the channels).
func TestGIFAdaptivePalette(t *testing.T) {
	var frames []image.Image
	var want []*image.RGBA
	var c ColorCounts
	for f := range 4 {
		g := gradient(64, 48, 5*f)
		frames, want = append(frames, g), append(want, g)
		c.Add(g)
	}
	if c.Len() <= MaxGIFColors {
		t.Fatalf("only %d colours: the test needs more than 256", c.Len())
	}
	pal := c.Palette(0)
	if len(pal) != MaxGIFColors {
		t.Fatalf("palette of %d colours, want 256", len(pal))
	}
	_, got := gifRoundTrip(t, frames, false)
	worst := 0
	for i := range got {
		worst = max(worst, maxChannelError(got[i], want[i]))
	}
	t.Logf("%d colours, largest channel error %d", c.Len(), worst)
	if worst > 28 {
		t.Errorf("largest channel error %d, bound 28", worst)
	}
	// The mean colour of the whole first frame, dithered and not.
	mean := func(m *image.RGBA) (s [3]float64) {
		for i := 0; i < len(m.Pix); i += 4 {
			for k := range 3 {
				s[k] += float64(m.Pix[i+k])
			}
		}
		for k := range 3 {
			s[k] /= float64(len(m.Pix) / 4)
		}
		return s
	}
	_, dith := gifRoundTrip(t, frames, true)
	ref, plain, dm := mean(want[0]), mean(got[0]), mean(dith[0])
	var ep, ed float64
	for k := range 3 {
		ep += abs64(plain[k] - ref[k])
		ed += abs64(dm[k] - ref[k])
	}
	if ed > 0.75*ep {
		t.Errorf("mean colour error: dithered %.3f, nearest %.3f", ed, ep)
	}
}

func abs64(v float64) float64 {
	if v < 0 {
		return -v
	}
	return v
}

// TestMedianCutKeepsSmallObjects: two far-apart clusters, one of 400
// pixels and one of 2 (a small object); with two colours allowed each
// cluster gets its own weighted mean (a cut at the median pixel would
// lump the small one in with part of the large one).
func TestMedianCutKeepsSmallObjects(t *testing.T) {
	var c ColorCounts
	row := func(r, g, b uint8, n int) {
		px := make([]byte, 0, 4*n)
		for range n {
			px = append(px, r, g, b, 0xff)
		}
		c.addRGBA(px)
	}
	row(10, 10, 10, 300)
	row(12, 10, 10, 100) // cluster one: mean red (3000+1200)/400 = 10.5 → 11
	row(200, 40, 40, 1)
	row(202, 40, 40, 1)
	p := c.Palette(2)
	want := color.Palette{color.RGBA{11, 10, 10, 255}, color.RGBA{201, 40, 40, 255}}
	if len(p) != 2 || p[0] != want[0] || p[1] != want[1] {
		t.Fatalf("palette %v, want %v", p, want)
	}
	if got := c.Palette(8); len(got) != 4 {
		t.Fatalf("4 colours with 8 allowed gave %d", len(got))
	}
	var empty ColorCounts
	if p := empty.Palette(0); len(p) != 1 {
		t.Fatalf("empty counts: %v", p)
	}
}

// TestGIFDeterministic: the same frames give the same bytes, and the
// palette does not depend on the order the frames came in or on the way
// the colours were counted.
func TestGIFDeterministic(t *testing.T) {
	var frames, rev []image.Image
	for f := range 5 {
		frames = append(frames, gradient(40, 30, 7*f))
	}
	for i := range frames {
		rev = append(rev, frames[len(frames)-1-i])
	}
	a, _ := gifRoundTrip(t, frames, false)
	b, _ := gifRoundTrip(t, frames, false)
	if !bytes.Equal(a, b) {
		t.Fatal("two encodings of the same frames differ")
	}
	var c1, c2 ColorCounts
	for i := range frames {
		c1.Add(frames[i].(*image.RGBA))
		c2.Add(rev[i].(*image.RGBA))
	}
	// The writer sorts the pixels, ColorCounts counts them in a map:
	// the same palette either way, whatever the frame order.
	w := &GIFWriter{}
	for _, f := range rev {
		w.Add(f)
	}
	p1, p2, p3 := c1.Palette(0), c2.Palette(0), w.Palette()
	if len(p1) != len(p2) || len(p1) != len(p3) || len(p1) != MaxGIFColors {
		t.Fatalf("palettes of %d, %d and %d colours", len(p1), len(p2), len(p3))
	}
	for i := range p1 {
		if p1[i] != p2[i] || p1[i] != p3[i] {
			t.Fatalf("palette entry %d: %v, %v, %v", i, p1[i], p2[i], p3[i])
		}
	}
}

// TestColorMapperMatchesPaletteIndex: the pruned nearest-colour search
// picks the index that image/color's Palette.Index (the stdlib's linear
// search) picks, ties included, on random palettes and colours.
func TestColorMapperMatchesPaletteIndex(t *testing.T) {
	rng := rand.New(rand.NewPCG(8, 9))
	for trial := range 20 {
		n := 1 + rng.IntN(MaxGIFColors)
		cols := randomColors(n, uint64(trial))
		if trial%4 == 0 { // coarse levels: many exact ties
			for i := range cols {
				cols[i].R, cols[i].G, cols[i].B = cols[i].R&0xc0, cols[i].G&0xc0, cols[i].B&0xc0
			}
		}
		pal := make(color.Palette, n)
		for i, c := range cols {
			pal[i] = c
		}
		m := newColorMapper(pal)
		for range 3000 {
			r, g, b := uint8(rng.UintN(256)), uint8(rng.UintN(256)), uint8(rng.UintN(256))
			if trial%4 == 0 {
				r, g, b = r&0xe0, g&0xe0, b&0xe0
			}
			got, want := m.index(packRGB(r, g, b)), pal.Index(color.RGBA{r, g, b, 0xff})
			if int(got) != want {
				t.Fatalf("trial %d, (%d,%d,%d): index %d (%v), Palette.Index says %d (%v)", trial, r, g, b, got, pal[got], want, pal[want])
			}
		}
	}
}

func TestGIFWriterErrors(t *testing.T) {
	w := &GIFWriter{}
	if err := w.Encode(io.Discard); err == nil {
		t.Fatal("no frames: no error")
	}
	w.Add(solid(4, 4, color.RGBA{1, 2, 3, 255}))
	if err := w.Add(solid(5, 4, color.RGBA{1, 2, 3, 255})); err == nil {
		t.Fatal("a frame of another size: no error")
	}
	if err := w.Add(image.NewRGBA(image.Rectangle{})); err == nil {
		t.Fatal("an empty frame: no error")
	}
	var b bytes.Buffer
	if err := w.Encode(&b); err != nil {
		t.Fatal(err)
	}
	g, err := gif.DecodeAll(&b)
	if err != nil || len(g.Image) != 1 || g.Image[0].Palette[0] != (color.RGBA{1, 2, 3, 255}) {
		t.Fatalf("one-colour GIF: %v", err)
	}
}

// BenchmarkGIFPalette counts the colours of 32 smooth frames and builds
// their palette by median cut.
func BenchmarkGIFPalette(b *testing.B) {
	frames := smoothFrames()
	b.ReportAllocs()
	for b.Loop() {
		var c ColorCounts
		for _, f := range frames {
			c.Add(f)
		}
		c.Palette(0)
	}
}

func BenchmarkGIFEncode(b *testing.B)       { benchGIF(b, smoothFrames(), false) }
func BenchmarkGIFEncodeDither(b *testing.B) { benchGIF(b, smoothFrames(), true) }

// BenchmarkGIFEncodeExact: 32 frames of a few colours (the exact path).
func BenchmarkGIFEncodeExact(b *testing.B) {
	r, _ := Builtin("checker", 32, 112, 80)
	frames, _ := ReadAll(r)
	benchGIF(b, frames, false)
}

// smoothFrames is 32 frames of a smooth 112×80 sequence.
func smoothFrames() []*image.RGBA {
	var frames []*image.RGBA
	for f := range 32 {
		frames = append(frames, gradient(112, 80, f))
	}
	return frames
}

// benchGIF adds and encodes frames, reporting their distinct colours.
func benchGIF(b *testing.B, frames []*image.RGBA, dither bool) {
	var c ColorCounts
	for _, f := range frames {
		c.Add(f)
	}
	b.ReportAllocs()
	for b.Loop() {
		w := &GIFWriter{Dither: dither}
		for _, f := range frames {
			if err := w.Add(f); err != nil {
				b.Fatal(err)
			}
		}
		if err := w.Encode(io.Discard); err != nil {
			b.Fatal(err)
		}
	}
	b.ReportMetric(float64(c.Len()), "colours")
}

// TestGIFPaletteBoundary: 256 colours are kept exactly, 257 are not; the
// writer and ColorCounts agree at both sizes.
func TestGIFPaletteBoundary(t *testing.T) {
	for _, n := range []int{MaxGIFColors, MaxGIFColors + 1} {
		cols := randomColors(n, 11)
		m := image.NewRGBA(image.Rect(0, 0, n, 2))
		for x, c := range cols {
			m.SetRGBA(x, 0, c)
			m.SetRGBA(x, 1, c)
		}
		var c ColorCounts
		c.Add(m)
		w := &GIFWriter{}
		w.Add(m)
		p, q := c.Palette(0), w.Palette()
		if len(p) != min(n, MaxGIFColors) || len(q) != len(p) {
			t.Fatalf("%d colours: palettes of %d and %d", n, len(p), len(q))
		}
		for i := range p {
			if p[i] != q[i] {
				t.Fatalf("%d colours: entry %d is %v and %v", n, i, p[i], q[i])
			}
		}
		_, got := gifRoundTrip(t, []image.Image{m}, false)
		if e := maxChannelError(got[0], m); (e == 0) != (n <= MaxGIFColors) {
			t.Errorf("%d colours: largest channel error %d", n, e)
		}
	}
}

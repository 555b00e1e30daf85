package frameio

import (
	"bytes"
	"image"
	"image/color"
	"image/gif"
	"image/jpeg"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func writePNG(t testing.TB, path string, img image.Image) {
	t.Helper()
	var b bytes.Buffer
	if err := png.Encode(&b, img); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, b.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
}

func solid(w, h int, c color.RGBA) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for i := 0; i < len(img.Pix); i += 4 {
		img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = c.R, c.G, c.B, c.A
	}
	return img
}

func oneLine(t *testing.T, err error, want ...string) {
	t.Helper()
	if err == nil {
		t.Fatalf("no error, want one naming %q", want)
	}
	msg := err.Error()
	if strings.Contains(msg, "\n") {
		t.Fatalf("error %q spans lines", msg)
	}
	for _, w := range want {
		if !strings.Contains(msg, w) {
			t.Fatalf("error %q does not name %q", msg, w)
		}
	}
}

func TestDirReaderOrderAndFormats(t *testing.T) {
	dir := t.TempDir()
	// Frame k is solid grey level 10k; written in an order a plain sort
	// would get wrong.
	names := map[int]string{0: "f0.png", 1: "f1.png", 2: "f2.jpg", 3: "f10.png", 4: "f11.PNG"}
	for k, n := range names {
		img := solid(16, 8, color.RGBA{uint8(40 * k), uint8(40 * k), uint8(40 * k), 255})
		if strings.HasSuffix(n, ".jpg") {
			var b bytes.Buffer
			if err := jpeg.Encode(&b, img, &jpeg.Options{Quality: 100}); err != nil {
				t.Fatal(err)
			}
			os.WriteFile(filepath.Join(dir, n), b.Bytes(), 0o644)
			continue
		}
		writePNG(t, filepath.Join(dir, n), img)
	}
	os.WriteFile(filepath.Join(dir, "notes.txt"), []byte("not a frame"), 0o644)
	os.WriteFile(filepath.Join(dir, ".hidden.png"), []byte("junk"), 0o644)
	os.Mkdir(filepath.Join(dir, "sub.png"), 0o755)
	r, err := Open(dir, Options{})
	if err != nil {
		t.Fatal(err)
	}
	if in := r.Info(); in.Width != 16 || in.Height != 8 || in.Frames != 5 || in.Channels != 3 {
		t.Fatalf("info %+v", in)
	}
	frames, err := ReadAll(r)
	if err != nil {
		t.Fatal(err)
	}
	for k, f := range frames {
		// JPEG of a flat grey is within a level or two (lossy); PNG exact.
		got, want := int(f.Pix[4*20]), 40*k
		if d := got - want; d < -2 || d > 2 || (k != 2 && d != 0) || f.Pix[3] != 255 {
			t.Errorf("frame %d (%s): level %d, want %d", k, names[k], got, want)
		}
	}
}

func TestDirReaderBadInput(t *testing.T) {
	empty := t.TempDir()
	os.WriteFile(filepath.Join(empty, "readme.txt"), []byte("x"), 0o644)
	_, err := Open(empty, Options{})
	oneLine(t, err, empty, "no .png")

	mixed := t.TempDir()
	writePNG(t, filepath.Join(mixed, "a1.png"), solid(8, 8, color.RGBA{A: 255}))
	writePNG(t, filepath.Join(mixed, "a2.png"), solid(8, 8, color.RGBA{A: 255}))
	writePNG(t, filepath.Join(mixed, "a10.png"), solid(9, 8, color.RGBA{A: 255}))
	r, err := Open(mixed, Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, err = ReadAll(r)
	oneLine(t, err, "a10.png", "9x8", "8x8")

	corrupt := t.TempDir()
	writePNG(t, filepath.Join(corrupt, "c1.png"), solid(8, 8, color.RGBA{A: 255}))
	var b bytes.Buffer
	png.Encode(&b, solid(8, 8, color.RGBA{A: 255}))
	os.WriteFile(filepath.Join(corrupt, "c2.png"), b.Bytes()[:b.Len()/2], 0o644)
	r, err = Open(corrupt, Options{})
	if err != nil {
		t.Fatal(err)
	}
	_, err = ReadAll(r)
	oneLine(t, err, "c2.png")

	first := t.TempDir()
	os.WriteFile(filepath.Join(first, "x.png"), []byte("not a png at all"), 0o644)
	_, err = Open(first, Options{})
	oneLine(t, err, "x.png")

	_, err = Open(filepath.Join(first, "missing"), Options{})
	oneLine(t, err, "missing")
	_, err = Open(filepath.Join(first, "x.bmp"), Options{})
	oneLine(t, err, "x.bmp")
	os.WriteFile(filepath.Join(first, "y.tiff"), nil, 0o644)
	_, err = Open(filepath.Join(first, "y.tiff"), Options{})
	oneLine(t, err, "y.tiff", "not a folder")
}

func TestRawReader(t *testing.T) {
	frames := patternFrames(3, 4, 5, 3)
	var raw []byte
	for _, f := range frames {
		for i := 0; i < len(f.Pix); i += 4 {
			raw = append(raw, f.Pix[i], f.Pix[i+1], f.Pix[i+2])
		}
	}
	r, err := Open("-", Options{Width: 5, Height: 4, Stdin: bytes.NewReader(raw)})
	if err != nil {
		t.Fatal(err)
	}
	got, err := ReadAll(r)
	if err != nil || len(got) != 3 {
		t.Fatalf("%d frames, %v", len(got), err)
	}
	for k := range got {
		if !bytes.Equal(got[k].Pix, frames[k].Pix) {
			t.Fatalf("frame %d differs", k)
		}
	}
	r, _ = Open("-", Options{Width: 5, Height: 4, Stdin: bytes.NewReader(raw[:len(raw)-7])})
	_, err = ReadAll(r)
	oneLine(t, err, "stdin", "partial frame", "53 of 60 bytes")
	r, _ = Open("-", Options{Width: 5, Height: 4, Stdin: bytes.NewReader(nil)})
	_, err = ReadAll(r)
	oneLine(t, err, "stdin", "no frames")
	_, err = Open("-", Options{Stdin: bytes.NewReader(raw)})
	oneLine(t, err, "--size")
}

func TestBuiltinDeterministic(t *testing.T) {
	for _, name := range builtinNames() {
		a, err := Builtin(name, 30, 64, 48)
		if err != nil {
			t.Fatal(err)
		}
		b, _ := Builtin(name, 30, 64, 48)
		fa, _ := ReadAll(a)
		fb, _ := ReadAll(b)
		if len(fa) != 30 {
			t.Fatalf("%s: %d frames", name, len(fa))
		}
		moved := 0
		for k := range fa {
			if !bytes.Equal(fa[k].Pix, fb[k].Pix) {
				t.Fatalf("%s: frame %d differs between two runs", name, k)
			}
			if k > 0 && !bytes.Equal(fa[k].Pix, fa[k-1].Pix) {
				moved++
			}
			one := image.NewRGBA(image.Rect(0, 0, 64, 48))
			if err := builtinFrame(name, k, one); err != nil || !bytes.Equal(one.Pix, fa[k].Pix) {
				t.Fatalf("%s: builtinFrame(%d) differs from the reader's frame", name, k)
			}
		}
		if moved < 25 {
			t.Errorf("%s: only %d of 29 frames change: the scene should move", name, moved)
		}
	}
	if _, err := Builtin("nosuch", 3, 8, 8); err == nil || !strings.Contains(err.Error(), "drift") {
		t.Fatalf("unknown scene: %v", err)
	}
	// Sub-image destinations are drawn the same.
	full := image.NewRGBA(image.Rect(0, 0, 20, 10))
	builtinFrame("drift", 5, full)
	big := image.NewRGBA(image.Rect(0, 0, 30, 20))
	sub := big.SubImage(image.Rect(3, 4, 23, 14)).(*image.RGBA)
	builtinFrame("drift", 5, sub)
	if !bytes.Equal(cloneRGBA(sub).Pix, full.Pix) {
		t.Fatal("builtinFrame into a sub-image differs")
	}
}

// TestGIFReaderDisposal builds a GIF with image/gif whose frames cover
// parts of the screen with each disposal method, and checks the
// composited frames against the GIF89a rules (W3C GIF89a specification,
// "Disposal Method": 1 leave in place, 2 restore to background, 3 restore
// to previous).
func TestGIFReaderDisposal(t *testing.T) {
	pal := color.Palette{color.RGBA{0, 0, 0, 255}, color.RGBA{255, 0, 0, 255}, color.RGBA{0, 255, 0, 255}, color.RGBA{0, 0, 255, 255}, color.RGBA{}}
	fill := func(r image.Rectangle, idx uint8) *image.Paletted {
		p := image.NewPaletted(r, pal)
		for i := range p.Pix {
			p.Pix[i] = idx
		}
		return p
	}
	g := &gif.GIF{
		Image: []*image.Paletted{
			fill(image.Rect(0, 0, 4, 4), 1), // red screen, kept
			fill(image.Rect(0, 0, 2, 2), 2), // green corner, then back to background
			fill(image.Rect(2, 2, 4, 4), 3), // blue corner, then restore previous
			fill(image.Rect(1, 1, 3, 3), 4), // fully transparent: shows what is under
		},
		Delay:           []int{1, 1, 1, 1},
		Disposal:        []byte{gif.DisposalNone, gif.DisposalBackground, gif.DisposalPrevious, gif.DisposalNone},
		Config:          image.Config{ColorModel: pal, Width: 4, Height: 4},
		BackgroundIndex: 0,
	}
	var b bytes.Buffer
	if err := gif.EncodeAll(&b, g); err != nil {
		t.Fatal(err)
	}
	path := filepath.Join(t.TempDir(), "d.gif")
	os.WriteFile(path, b.Bytes(), 0o644)
	r, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	frames, err := ReadAll(r)
	if err != nil || len(frames) != 4 {
		t.Fatalf("%d frames, %v", len(frames), err)
	}
	R, G, B, K := "R", "G", "B", "K"
	at := func(f *image.RGBA, x, y int) string {
		c := f.RGBAAt(x, y)
		switch {
		case c == color.RGBA{255, 0, 0, 255}:
			return R
		case c == color.RGBA{0, 255, 0, 255}:
			return G
		case c == color.RGBA{0, 0, 255, 255}:
			return B
		case c == color.RGBA{0, 0, 0, 255}:
			return K
		}
		return "?"
	}
	want := [][4]string{ // pixels (0,0) (3,3) (1,1) (2,2)
		{R, R, R, R},
		{G, R, G, R},
		{K, B, K, B}, // green corner disposed to background (black)
		{K, R, K, R}, // blue corner restored to previous; transparent frame shows it
	}
	for k, f := range frames {
		got := [4]string{at(f, 0, 0), at(f, 3, 3), at(f, 1, 1), at(f, 2, 2)}
		if got != want[k] {
			t.Errorf("frame %d: %v, want %v", k, got, want[k])
		}
	}
	bad := filepath.Join(t.TempDir(), "bad.gif")
	os.WriteFile(bad, b.Bytes()[:b.Len()/2], 0o644)
	_, err = Open(bad, Options{})
	oneLine(t, err, "bad.gif")
}

func TestGIFWriterRoundTrip(t *testing.T) {
	// The checker scene has few colours, so the GIF keeps every pixel
	// exactly, dithered or not (decoded by image/gif).
	for _, dither := range []bool{false, true} {
		r, _ := Builtin("checker", 6, 40, 30)
		frames, _ := ReadAll(r)
		if len(frames) != 6 {
			t.Fatalf("%d checker frames, want 6", len(frames))
		}
		in := make([]image.Image, len(frames))
		for k, f := range frames {
			in[k] = f
		}
		_, got := gifRoundTrip(t, in, dither)
		for k, p := range got {
			if !bytes.Equal(p.Pix, frames[k].Pix) {
				t.Fatalf("dither %v: frame %d changed in the GIF round trip", dither, k)
			}
		}
	}
}

func TestReadAllStopsAtEOF(t *testing.T) {
	r, _ := Builtin("drift", 2, 8, 8)
	ReadAll(r)
	if _, err := r.Next(); err != io.EOF {
		t.Fatalf("after the end: %v, want io.EOF", err)
	}
}

// FuzzReadGIF feeds arbitrary bytes to the GIF reader (image/gif's
// decoder, then our compositing): no panic, and every frame it returns
// is opaque and of the screen size.
func FuzzReadGIF(f *testing.F) {
	r, _ := Builtin("checker", 3, 12, 9)
	frames, _ := ReadAll(r)
	w := &GIFWriter{}
	for _, fr := range frames {
		w.Add(fr)
	}
	var b bytes.Buffer
	w.Encode(&b)
	f.Add(b.Bytes())
	pal := color.Palette{color.RGBA{0, 0, 0, 255}, color.RGBA{255, 0, 0, 255}, color.RGBA{}}
	g := &gif.GIF{
		Image:    []*image.Paletted{image.NewPaletted(image.Rect(0, 0, 4, 4), pal), image.NewPaletted(image.Rect(1, 1, 3, 3), pal)},
		Delay:    []int{1, 1},
		Disposal: []byte{gif.DisposalPrevious, gif.DisposalBackground},
		Config:   image.Config{ColorModel: pal, Width: 4, Height: 4},
	}
	b.Reset()
	gif.EncodeAll(&b, g)
	f.Add(b.Bytes())
	// Crafted headers: a screen of 65535×65535, and many frames that
	// together pass the budget the fuzz function gives.
	huge := append([]byte(nil), b.Bytes()...)
	huge[6], huge[7], huge[8], huge[9] = 0xff, 0xff, 0xff, 0xff
	f.Add(huge)
	f.Add(manyFrameGIF(400, 16, 16))
	f.Fuzz(func(t *testing.T, data []byte) {
		gr, err := readGIF("fuzz.gif", bytes.NewReader(data), 1<<16)
		if err != nil {
			return
		}
		info := gr.Info()
		for {
			fr, err := gr.Next()
			if err == io.EOF {
				return
			}
			if err != nil {
				t.Fatalf("frame error after a good open: %v", err)
			}
			if fr.Rect.Dx() != info.Width || fr.Rect.Dy() != info.Height {
				t.Fatalf("frame %v, screen %dx%d", fr.Rect, info.Width, info.Height)
			}
			for i := 3; i < len(fr.Pix); i += 4 {
				if fr.Pix[i] != 255 {
					t.Fatal("frame not opaque")
				}
			}
		}
	})
}

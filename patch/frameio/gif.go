package frameio

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/color/palette"
	"image/draw"
	"image/gif"
	"io"
	"os"
	"sort"
)

// gifReader composites the frames of an animated GIF onto a canvas of
// the logical screen size, honouring each frame's disposal method.
type gifReader struct {
	info   Info
	g      *gif.GIF
	i      int
	canvas *image.RGBA
	saved  *image.RGBA
	bg     color.RGBA
}

func openGIF(path string, maxPixels int) (Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", path, unwrapPath(err))
	}
	defer f.Close()
	return readGIF(path, f, maxPixels)
}

// readGIF decodes a whole GIF from r (image/gif decodes all frames at
// once), refusing a screen over the pixel budget, or frames that hold
// more than 4·maxPixels pixels together, before decoding any frame.
func readGIF(name string, r io.ReadSeeker, maxPixels int) (*gifReader, error) {
	cfg, err := gif.DecodeConfig(r)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	if err := checkBudget(cfg.Width, cfg.Height, maxPixels); err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	if _, err := r.Seek(0, io.SeekStart); err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	if err := checkGIFBudget(r, maxPixels); err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	if _, err := r.Seek(0, io.SeekStart); err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	g, err := gif.DecodeAll(r)
	if err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	return newGIFReader(name, g)
}

// NewGIFReader returns a reader of the composited frames of g.
func NewGIFReader(name string, g *gif.GIF) (Reader, error) { return newGIFReader(name, g) }

func newGIFReader(name string, g *gif.GIF) (*gifReader, error) {
	if len(g.Image) == 0 {
		return nil, fmt.Errorf("input %s: GIF holds no frames", name)
	}
	w, h := g.Config.Width, g.Config.Height
	if w == 0 && h == 0 {
		b := g.Image[0].Bounds()
		w, h = b.Max.X, b.Max.Y
	}
	if err := checkSize(w, h); err != nil {
		return nil, fmt.Errorf("input %s: %w", name, err)
	}
	r := &gifReader{info: Info{Name: name, Width: w, Height: h, Channels: 3, Frames: len(g.Image)}, g: g,
		bg: color.RGBA{A: 0xff}}
	// The background colour, where the file names an opaque one.
	if p, ok := g.Config.ColorModel.(color.Palette); ok && int(g.BackgroundIndex) < len(p) {
		if c := color.RGBAModel.Convert(p[g.BackgroundIndex]).(color.RGBA); c.A == 0xff {
			r.bg = c
		}
	}
	return r, nil
}

func (r *gifReader) Info() Info { return r.info }

func (r *gifReader) Next() (*image.RGBA, error) {
	if r.i >= len(r.g.Image) {
		return nil, io.EOF
	}
	if r.canvas == nil {
		r.canvas = image.NewRGBA(image.Rect(0, 0, r.info.Width, r.info.Height))
		draw.Draw(r.canvas, r.canvas.Bounds(), image.NewUniform(r.bg), image.Point{}, draw.Src)
	} else {
		// Dispose of the previous frame, as its disposal method says.
		prev := r.g.Image[r.i-1].Bounds()
		switch r.disposal(r.i - 1) {
		case gif.DisposalBackground:
			draw.Draw(r.canvas, prev, image.NewUniform(r.bg), image.Point{}, draw.Src)
		case gif.DisposalPrevious:
			copy(r.canvas.Pix, r.saved.Pix)
		}
	}
	if r.disposal(r.i) == gif.DisposalPrevious {
		if r.saved == nil {
			r.saved = image.NewRGBA(r.canvas.Bounds())
		}
		copy(r.saved.Pix, r.canvas.Pix)
	}
	fr := r.g.Image[r.i]
	draw.Draw(r.canvas, fr.Bounds(), fr, fr.Bounds().Min, draw.Over)
	r.i++
	return r.canvas, nil
}

func (r *gifReader) disposal(i int) byte {
	if i < len(r.g.Disposal) {
		return r.g.Disposal[i]
	}
	return gif.DisposalNone
}

func (r *gifReader) Close() error { return nil }

// Palette is the fixed palette of exported GIFs: the 6×6×6 colour cube
// (levels 0, 51, ..., 255; image/color/palette.WebSafe) followed by 40
// greys between the cube's grey levels, 256 colours in all.
var Palette = func() color.Palette {
	p := make(color.Palette, 0, 256)
	p = append(p, palette.WebSafe...)
	for i := 1; len(p) < 256; i++ {
		v := uint8((i*255 + 20) / 41)
		if v%51 == 0 {
			continue
		}
		p = append(p, color.RGBA{v, v, v, 0xff})
	}
	return p
}()

// GIFWriter collects frames for an animated GIF in the fixed Palette.
type GIFWriter struct {
	// Delay is the time each frame is shown, in hundredths of a second.
	Delay int
	// Dither spreads the quantisation error with Floyd–Steinberg
	// (image/draw.FloydSteinberg) instead of mapping every pixel to its
	// nearest palette colour (the default: fast, exact for colours in the
	// palette, and about 50 times faster).
	Dither bool
	g      gif.GIF
}

// Add converts img to the palette and appends it. All frames must have
// img's size.
func (w *GIFWriter) Add(img image.Image) error {
	b := img.Bounds()
	if n := len(w.g.Image); n > 0 && w.g.Image[0].Bounds().Size() != b.Size() {
		return fmt.Errorf("gif: frame %d is %dx%d, the first is %dx%d", n, b.Dx(), b.Dy(), w.g.Image[0].Bounds().Dx(), w.g.Image[0].Bounds().Dy())
	}
	p := image.NewPaletted(image.Rect(0, 0, b.Dx(), b.Dy()), Palette)
	QuantizeInto(p, img, w.Dither)
	w.g.Image = append(w.g.Image, p)
	w.g.Delay = append(w.g.Delay, w.Delay)
	w.g.Disposal = append(w.g.Disposal, gif.DisposalNone)
	return nil
}

// Len is the number of frames added.
func (w *GIFWriter) Len() int { return len(w.g.Image) }

// Encode writes the animation (looping forever) to out.
func (w *GIFWriter) Encode(out io.Writer) error {
	if len(w.g.Image) == 0 {
		return errors.New("gif: no frames")
	}
	w.g.LoopCount = 0
	return gif.EncodeAll(out, &w.g)
}

// QuantizeInto draws img into the paletted dst (same size), with
// Floyd–Steinberg dithering when dither is set (image/draw). Colours that
// are in dst's palette come through unchanged either way. Without
// dithering, an *image.RGBA source on the fixed Palette takes a fast path
// that picks the same index as color.Palette.Index.
func QuantizeInto(dst *image.Paletted, img image.Image, dither bool) {
	if dither {
		draw.FloydSteinberg.Draw(dst, dst.Bounds(), img, img.Bounds().Min)
		return
	}
	src, ok := img.(*image.RGBA)
	if !ok || len(dst.Palette) != len(Palette) || &dst.Palette[0] != &Palette[0] {
		draw.Draw(dst, dst.Bounds(), img, img.Bounds().Min, draw.Src)
		return
	}
	b := src.Bounds()
	w, h := min(b.Dx(), dst.Rect.Dx()), min(b.Dy(), dst.Rect.Dy())
	for y := 0; y < h; y++ {
		row := src.Pix[src.PixOffset(b.Min.X, b.Min.Y+y):][: 4*w : 4*w]
		out := dst.Pix[dst.PixOffset(dst.Rect.Min.X, dst.Rect.Min.Y+y):][:w:w]
		for x := range out {
			out[x] = nearest(row[4*x], row[4*x+1], row[4*x+2])
		}
	}
}

// nearest is the index of the Palette colour that color.Palette.Index
// picks for (r, g, b): the least sum over channels of
// (257·d)² >> 2 (image/color's sqDiff on 16-bit values), the first index
// on ties. Only two kinds of candidate can win: the cube point nearest in
// each channel (the cube is separable and has no per-channel ties), and
// the two greys bracketing the mean (r+g+b)/3 (the exact squared distance
// to a grey (v, v, v) is 3v² − 2v(r+g+b) + const). The 16-bit rounding
// only decides exact ties, which these candidates cover.
func nearest(r, g, b uint8) uint8 {
	qr, qg, qb := (int(r)+25)/51, (int(g)+25)/51, (int(b)+25)/51
	best := uint8(36*qr + 6*qg + qb)
	bd := dist16(r, g, b, uint8(51*qr), uint8(51*qg), uint8(51*qb))
	lo := greyLo[int(r)+int(g)+int(b)]
	for k := lo; k <= lo+1 && int(k) < len(greys); k++ {
		v, i := greys[k][0], greys[k][1]
		if d := dist16(r, g, b, v, v, v); d < bd || d == bd && i < best {
			best, bd = i, d
		}
	}
	return best
}

// dist16 is color.Palette.Index's distance between two opaque colours.
func dist16(r, g, b, pr, pg, pb uint8) uint32 {
	return sqd(r, pr) + sqd(g, pg) + sqd(b, pb)
}

func sqd(x, y uint8) uint32 {
	d := uint32(x)*0x101 - uint32(y)*0x101
	return (d * d) >> 2
}

// greys lists the grey entries of Palette as (level, index), by level;
// greyLo[s] is the position in greys of the highest level v with
// 3v ≤ s.
var greys, greyLo = func() ([][2]uint8, [766]uint8) {
	var gs [][2]uint8
	for i, c := range Palette {
		if rgba := c.(color.RGBA); rgba.R == rgba.G && rgba.G == rgba.B {
			gs = append(gs, [2]uint8{rgba.R, uint8(i)})
		}
	}
	sort.Slice(gs, func(a, b int) bool { return gs[a][0] < gs[b][0] })
	var lo [766]uint8
	for s := range lo {
		for k := range gs {
			if 3*int(gs[k][0]) <= s {
				lo[s] = uint8(k)
			}
		}
	}
	return gs, lo
}()

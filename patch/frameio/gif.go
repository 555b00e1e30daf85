package frameio

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/gif"
	"io"
	"os"
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

// GIFWriter collects frames for an animated GIF whose one palette is
// built from the frames themselves (ColorCounts.Palette): exact when the
// whole sequence has at most 256 colours, median cut otherwise. It keeps
// every frame (3 bytes a pixel) until Encode, which builds the palette
// from them all. play --gif and export --as gif both write through it.
type GIFWriter struct {
	// Delay is the time each frame is shown, in hundredths of a second.
	Delay int
	// Dither spreads the quantisation error with Floyd–Steinberg
	// (image/draw.FloydSteinberg) instead of mapping every pixel to its
	// nearest palette colour (the default). It changes nothing where the
	// palette is exact.
	Dither bool
	w, h   int
	n      int
	rgb    []byte // the frames, row after row, 3 bytes a pixel
	counts ColorCounts
	row    *image.RGBA // scratch for non-RGBA frames
}

// Add appends a copy of img. All frames must have img's size.
func (w *GIFWriter) Add(img image.Image) error {
	b := img.Bounds()
	if w.n > 0 && (b.Dx() != w.w || b.Dy() != w.h) {
		return fmt.Errorf("gif: frame %d is %dx%d, the first is %dx%d", w.n, b.Dx(), b.Dy(), w.w, w.h)
	}
	if b.Empty() {
		return fmt.Errorf("gif: frame %d is empty", w.n)
	}
	w.w, w.h = b.Dx(), b.Dy()
	src, ok := img.(*image.RGBA)
	if !ok {
		if w.row == nil || w.row.Rect.Dx() != w.w {
			w.row = image.NewRGBA(image.Rect(0, 0, w.w, 1))
		}
	}
	for y := b.Min.Y; y < b.Max.Y; y++ {
		var row []byte
		if ok {
			i := src.PixOffset(b.Min.X, y)
			row = src.Pix[i : i+4*w.w]
		} else {
			draw.Draw(w.row, w.row.Rect, img, image.Pt(b.Min.X, y), draw.Src)
			row = w.row.Pix
		}
		w.counts.addRGBA(row)
		for x := 0; x < len(row); x += 4 {
			w.rgb = append(w.rgb, row[x], row[x+1], row[x+2])
		}
	}
	w.n++
	return nil
}

// Len is the number of frames added.
func (w *GIFWriter) Len() int { return w.n }

// Palette is the palette Encode draws the frames with.
func (w *GIFWriter) Palette() color.Palette { return w.counts.Palette(MaxGIFColors) }

// Encode writes the animation (looping forever, one global palette) to
// out. The same frames give the same bytes.
func (w *GIFWriter) Encode(out io.Writer) error {
	if w.n == 0 {
		return errors.New("gif: no frames")
	}
	pal := w.Palette()
	g := gif.GIF{LoopCount: 0, Config: image.Config{ColorModel: pal, Width: w.w, Height: w.h}}
	m := newColorMapper(pal)
	var rgba *image.RGBA
	if w.Dither {
		rgba = image.NewRGBA(image.Rect(0, 0, w.w, w.h))
	}
	size := 3 * w.w * w.h
	for f := range w.n {
		frame := w.rgb[f*size : (f+1)*size]
		p := image.NewPaletted(image.Rect(0, 0, w.w, w.h), pal)
		if w.Dither && len(pal) < w.counts.Len() {
			for i, j := 0, 0; i < len(frame); i, j = i+3, j+4 {
				rgba.Pix[j], rgba.Pix[j+1], rgba.Pix[j+2], rgba.Pix[j+3] = frame[i], frame[i+1], frame[i+2], 0xff
			}
			draw.FloydSteinberg.Draw(p, p.Rect, rgba, image.Point{})
		} else {
			for i, j := 0, 0; i < len(frame); i, j = i+3, j+1 {
				p.Pix[j] = m.index(packRGB(frame[i], frame[i+1], frame[i+2]))
			}
		}
		g.Image = append(g.Image, p)
		g.Delay = append(g.Delay, w.Delay)
		g.Disposal = append(g.Disposal, gif.DisposalNone)
	}
	return gif.EncodeAll(out, &g)
}

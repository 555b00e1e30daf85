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
	"slices"
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
// built from the frames themselves (as ColorCounts.Palette builds it):
// exact when the whole sequence has at most 256 colours, median cut
// otherwise. It keeps every frame (3 bytes a pixel) until Encode, which
// builds the palette from them all (with about 8 more bytes a pixel
// while it does, past 256 colours). play --gif and export --as gif both
// write through it.
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
	rgb    []byte      // the frames, row after row, 3 bytes a pixel
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
func (w *GIFWriter) Palette() color.Palette {
	pal, _, _ := w.palette()
	return pal
}

// palette builds the palette from the frames' colours, sorted by a radix
// sort of their packed values (no map: the cost grows with the pixels),
// and returns with it the distinct colours in increasing order and the
// palette index of each.
func (w *GIFWriter) palette() (color.Palette, []uint32, []uint8) {
	if distinct, ok := fewColors(w.rgb); ok {
		pal := make(color.Palette, len(distinct))
		idx := make([]uint8, len(distinct))
		for i, k := range distinct {
			pal[i] = color.RGBA{uint8(k >> 16), uint8(k >> 8), uint8(k), 0xff}
			idx[i] = uint8(i)
		}
		return pal, distinct, idx
	}
	keys := make([]uint32, len(w.rgb)/3)
	for i := range keys {
		keys[i] = packRGB(w.rgb[3*i], w.rgb[3*i+1], w.rgb[3*i+2])
	}
	radixSort24(keys, make([]uint32, len(keys)))
	var cs []colorCount
	var distinct []uint32
	for i := 0; i < len(keys); {
		j := i + 1
		for j < len(keys) && keys[j] == keys[i] {
			j++
		}
		k := keys[i]
		cs = append(cs, colorCount{rgb: [3]uint8{uint8(k >> 16), uint8(k >> 8), uint8(k)}, n: uint64(j - i)})
		distinct = append(distinct, k)
		i = j
	}
	pal := paletteOf(cs, MaxGIFColors)
	idx := make([]uint8, len(distinct))
	if len(pal) == len(distinct) {
		for i := range idx {
			idx[i] = uint8(i) // exact: the palette is the colours in order
		}
	} else {
		m := newColorMapper(pal)
		for i, k := range distinct {
			idx[i] = m.search(int32(k>>16), int32(k>>8&0xff), int32(k&0xff))
		}
	}
	return pal, distinct, idx
}

// fewColors returns the distinct colours of the RGB bytes rgb, in
// increasing packed order, when there are at most MaxGIFColors of them
// (a small open-addressing table, given up at the 257th colour).
func fewColors(rgb []byte) ([]uint32, bool) {
	const slots = 1024    // a power of two, four times MaxGIFColors
	var tab [slots]uint32 // packed colour + 1; 0 is empty
	n, last := 0, uint32(1<<24)
	for i := 0; i+2 < len(rgb); i += 3 {
		k := packRGB(rgb[i], rgb[i+1], rgb[i+2])
		if k == last {
			continue
		}
		last = k
		h := (k * 2654435761) >> 22 & (slots - 1) // Knuth's multiplicative hash
		for tab[h] != 0 && tab[h] != k+1 {
			h = (h + 1) & (slots - 1)
		}
		if tab[h] == 0 {
			if n++; n > MaxGIFColors {
				return nil, false
			}
			tab[h] = k + 1
		}
	}
	out := make([]uint32, 0, n)
	for _, v := range tab {
		if v != 0 {
			out = append(out, v-1)
		}
	}
	slices.Sort(out)
	return out, true
}

// radixSort24 sorts keys (values below 1<<24) in place, three 8-bit
// passes through tmp (the same length).
func radixSort24(keys, tmp []uint32) {
	src, dst := keys, tmp
	for shift := 0; shift < 24; shift += 8 {
		var pos [256]int
		for _, k := range src {
			pos[k>>shift&0xff]++
		}
		for v, at := 0, 0; v < 256; v++ {
			pos[v], at = at, at+pos[v]
		}
		for _, k := range src {
			d := k >> shift & 0xff
			dst[pos[d]] = k
			pos[d]++
		}
		src, dst = dst, src
	}
	copy(keys, src) // three passes end in tmp
}

// Encode writes the animation (looping forever, one global palette) to
// out. The same frames give the same bytes.
func (w *GIFWriter) Encode(out io.Writer) error {
	if w.n == 0 {
		return errors.New("gif: no frames")
	}
	pal, distinct, idx := w.palette()
	g := gif.GIF{LoopCount: 0, Config: image.Config{ColorModel: pal, Width: w.w, Height: w.h}}
	var rgba *image.RGBA
	dither := w.Dither && len(pal) < len(distinct)
	if dither {
		rgba = image.NewRGBA(image.Rect(0, 0, w.w, w.h))
	}
	size := 3 * w.w * w.h
	all := make([]uint8, w.n*w.w*w.h)
	for f := range w.n {
		frame := w.rgb[f*size : (f+1)*size]
		p := &image.Paletted{Pix: all[f*w.w*w.h : (f+1)*w.w*w.h : (f+1)*w.w*w.h], Stride: w.w, Rect: image.Rect(0, 0, w.w, w.h), Palette: pal}
		if dither {
			for i, j := 0, 0; i < len(frame); i, j = i+3, j+4 {
				rgba.Pix[j], rgba.Pix[j+1], rgba.Pix[j+2], rgba.Pix[j+3] = frame[i], frame[i+1], frame[i+2], 0xff
			}
			draw.FloydSteinberg.Draw(p, p.Rect, rgba, image.Point{})
		} else {
			last, li := uint32(1<<24), uint8(0)
			for i, j := 0, 0; i < len(frame); i, j = i+3, j+1 {
				k := packRGB(frame[i], frame[i+1], frame[i+2])
				if k != last {
					at, _ := slices.BinarySearch(distinct, k)
					last, li = k, idx[at]
				}
				p.Pix[j] = li
			}
		}
		g.Image = append(g.Image, p)
		g.Delay = append(g.Delay, w.Delay)
		g.Disposal = append(g.Disposal, gif.DisposalNone)
	}
	return gif.EncodeAll(out, &g)
}

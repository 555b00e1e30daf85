package patch

import (
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"unsafe"
)

// Pixel values and the luma rule.
//
// A byte b becomes the float32 value float32(b)/255 (correctly rounded
// float32 division, the same as NumPy's arr.astype(np.float32)/255).
//
// Which bytes a frame holds depends on its type:
//   - *image.RGBA: the stored (alpha-premultiplied) R, G, B bytes, i.e. the
//     colour composited over black; alpha is ignored.
//   - *image.NRGBA: the stored, un-premultiplied R, G, B bytes; alpha is
//     ignored.
//   - *image.Gray: the grey byte.
//   - *image.YCbCr: R, G, B from the stdlib's color.YCbCrToRGB (JFIF
//     full-range conversion), converted into a scratch RGBA frame first.
//   - *image.Paletted: the palette colour's premultiplied R, G, B bytes;
//     an index past the end of the palette reads as black.
//   - anything else: Color.RGBA() >> 8 of every pixel (premultiplied, as
//     image/draw computes it).
//
// A grey source tokenized with Channels 3 gives three equal values. An RGB
// source tokenized with Channels 1 gives the ITU-R BT.601 luma
// Y' = 0.299 R + 0.587 G + 0.114 B (Recommendation ITU-R BT.601, the
// weights of the luma equation), computed exactly in integers and divided
// once:  float32(299·R + 587·G + 114·B) / 255000.

// unit[b] is float32(b)/255.
var unit = func() (u [256]float32) {
	for i := range u {
		u[i] = float32(i) / 255
	}
	return u
}()

// luma returns the BT.601 luma of an 8-bit RGB triple in [0,1]:
// float32(299·R + 587·G + 114·B) / 255000, computed as a float64 product
// rounded to float32, which gives the same float32 for every possible sum
// (TestLumaProductExact checks all 255 001) without a division.
func luma(r, g, b uint8) float32 {
	return float32(float64(299*int32(r)+587*int32(g)+114*int32(b)) * (1.0 / 255000))
}

type pixKind int

const (
	kindRGBA pixKind = iota // 4 bytes a pixel, R G B first (RGBA and NRGBA)
	kindGray
)

// pixSource reads rows of pixels of one frame; x and y are relative to the
// frame's bounds.
type pixSource struct {
	kind   pixKind
	pix    []byte
	stride int
}

func (t *Tokenizer) source(img image.Image) (pixSource, error) {
	g := t.g
	b := img.Bounds()
	if b.Dx() != g.Width || b.Dy() != g.Height {
		return pixSource{}, fmt.Errorf("tokenize: frame is %dx%d, grid wants %dx%d", b.Dx(), b.Dy(), g.Width, g.Height)
	}
	packed := func(pix []byte, stride, off, bpp int) (pixSource, error) {
		need := off + (g.Height-1)*stride + g.Width*bpp
		if off < 0 || stride < g.Width*bpp || len(pix) < need {
			return pixSource{}, fmt.Errorf("tokenize: %T pixel buffer holds %d bytes, %dx%d frame needs %d", img, len(pix), g.Width, g.Height, need)
		}
		k := kindRGBA
		if bpp == 1 {
			k = kindGray
		}
		return pixSource{kind: k, pix: pix[off:need], stride: stride}, nil
	}
	switch im := img.(type) {
	case *image.RGBA:
		return packed(im.Pix, im.Stride, im.PixOffset(b.Min.X, b.Min.Y), 4)
	case *image.NRGBA:
		return packed(im.Pix, im.Stride, im.PixOffset(b.Min.X, b.Min.Y), 4)
	case *image.Gray:
		return packed(im.Pix, im.Stride, im.PixOffset(b.Min.X, b.Min.Y), 1)
	case *image.YCbCr:
		if len(im.Y) < im.YOffset(b.Max.X-1, b.Max.Y-1)+1 || len(im.Cb) < im.COffset(b.Max.X-1, b.Max.Y-1)+1 || len(im.Cr) < len(im.Cb) {
			return pixSource{}, fmt.Errorf("tokenize: YCbCr planes too short for a %dx%d frame", g.Width, g.Height)
		}
		ycbcrToRGBA(im, t.scratch())
		return pixSource{kind: kindRGBA, pix: t.generic.Pix, stride: t.generic.Stride}, nil
	case *image.Paletted:
		s, err := packed(im.Pix, im.Stride, im.PixOffset(b.Min.X, b.Min.Y), 1)
		if err != nil {
			return s, err
		}
		if t.pal == nil {
			t.pal = new([256][3]uint8)
		}
		// Indexes beyond the palette read as black (Paletted.At would
		// panic on them).
		*t.pal = [256][3]uint8{}
		for i, c := range im.Palette {
			if i >= 256 {
				break
			}
			r, gg, bb, _ := c.RGBA()
			t.pal[i] = [3]uint8{uint8(r >> 8), uint8(gg >> 8), uint8(bb >> 8)}
		}
		out := t.scratch()
		for y := 0; y < g.Height; y++ {
			in := s.pix[y*s.stride : y*s.stride+g.Width]
			o := out.Pix[y*out.Stride : y*out.Stride+4*g.Width]
			for x, ix := range in {
				c := &t.pal[ix]
				px := o[4*x : 4*x+4 : 4*x+4]
				px[0], px[1], px[2], px[3] = c[0], c[1], c[2], 255
			}
		}
		return pixSource{kind: kindRGBA, pix: out.Pix, stride: out.Stride}, nil
	}
	out := t.scratch()
	draw.Draw(out, out.Rect, img, b.Min, draw.Src)
	return pixSource{kind: kindRGBA, pix: out.Pix, stride: out.Stride}, nil
}

// scratch returns the tokenizer's Width×Height RGBA frame for sources
// that are converted before they are cut.
func (t *Tokenizer) scratch() *image.RGBA {
	if t.generic == nil {
		t.generic = image.NewRGBA(image.Rect(0, 0, t.g.Width, t.g.Height))
	}
	return t.generic
}

// ycbcrToRGBA converts im into out (same size, origin 0) with the
// stdlib's color.YCbCrToRGB, finding each pixel's chroma sample as
// (*image.YCbCr).COffset does.
func ycbcrToRGBA(im *image.YCbCr, out *image.RGBA) {
	b := im.Rect
	hs, vs := 0, 0 // log2 of the horizontal and vertical subsampling
	switch im.SubsampleRatio {
	case image.YCbCrSubsampleRatio422:
		hs = 1
	case image.YCbCrSubsampleRatio420:
		hs, vs = 1, 1
	case image.YCbCrSubsampleRatio440:
		vs = 1
	case image.YCbCrSubsampleRatio411:
		hs = 2
	case image.YCbCrSubsampleRatio410:
		hs, vs = 2, 1
	}
	w := b.Dx()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		yrow := im.Y[im.YOffset(b.Min.X, y):]
		yrow = yrow[:w]
		o := out.Pix[(y-b.Min.Y)*out.Stride : (y-b.Min.Y)*out.Stride+4*w]
		if b.Min.X < 0 || b.Min.Y < 0 {
			// Shifts floor where COffset's division truncates: ask it.
			for i, yy := range yrow {
				ci := im.COffset(b.Min.X+i, y)
				r, g, bb := color.YCbCrToRGB(yy, im.Cb[ci], im.Cr[ci])
				px := o[4*i : 4*i+4 : 4*i+4]
				px[0], px[1], px[2], px[3] = r, g, bb, 255
			}
			continue
		}
		crow := (y>>vs - b.Min.Y>>vs) * im.CStride
		c0 := b.Min.X >> hs
		for i, yy := range yrow {
			ci := crow + (b.Min.X+i)>>hs - c0
			r, g, bb := color.YCbCrToRGB(yy, im.Cb[ci], im.Cr[ci])
			px := o[4*i : 4*i+4 : 4*i+4]
			px[0], px[1], px[2], px[3] = r, g, bb, 255
		}
	}
}

func (t *Tokenizer) tokenize(img image.Image, dst *TokenSet) error {
	g := t.g
	n, d := g.N(), g.D()
	if len(dst.Pos) < n || len(dst.Data) < n*d {
		return fmt.Errorf("tokenize: token set has room for %d tokens of %d values, grid needs %d of %d", len(dst.Pos), min(dst.D, len(dst.Data)), n, d)
	}
	src, err := t.source(img)
	if err != nil {
		return err
	}
	dst.N, dst.D = n, d
	setGridPos(g, dst.Pos[:n])
	tokenizeRows(g, &src, dst.Data)
	return nil
}

// setGridPos sets pos[i] = g.Cell(i) without dividing.
func setGridPos(g *Grid, pos []Pos) {
	i := 0
	for r := 0; r < g.Rows; r++ {
		for c := 0; c < g.Cols; c++ {
			pos[i] = Pos{Row: int16(r), Col: int16(c)}
			i++
		}
	}
}

func fillValues(v []float32, f float32) {
	for i := range v {
		v[i] = f
	}
}

// row fills dst with the n pixels of frame row y starting at column x.
func (s *pixSource) row(dst []float32, x, y, n, C int) {
	switch s.kind {
	case kindRGBA:
		off := y*s.stride + 4*x
		if p := s.pix[off : off+4*n]; C == 3 {
			rgbaRow3(dst, p)
		} else {
			rgbaRow1(dst, p)
		}
	case kindGray:
		off := y*s.stride + x
		if p := s.pix[off : off+n]; C == 3 {
			grayRow3(dst, p)
		} else {
			grayRow1(dst, p)
		}
	}
}

func rgbaRow3(dst []float32, p []byte) {
	n := min(len(p)/4, len(dst)/3)
	if n == 0 {
		return
	}
	// Pointer arithmetic within the two slices, checked above: the
	// bounds-checked loop spends most of its instructions on slice
	// bookkeeping (measured 2-3x slower).
	sp, dp := unsafe.Pointer(&p[0]), unsafe.Pointer(&dst[0])
	for i := 0; i < n; i++ {
		s := (*[3]byte)(unsafe.Add(sp, 4*i))
		d := (*[3]float32)(unsafe.Add(dp, 12*i))
		d[0], d[1], d[2] = unit[s[0]], unit[s[1]], unit[s[2]]
	}
}

func rgbaRow1(dst []float32, p []byte) {
	n := len(p) / 4
	dst = dst[:n]
	for i := range dst {
		s := p[4*i : 4*i+3 : 4*i+3]
		dst[i] = luma(s[0], s[1], s[2])
	}
}

func grayRow1(dst []float32, p []byte) {
	dst = dst[:len(p)]
	for i, v := range p {
		dst[i] = unit[v]
	}
}

func grayRow3(dst []float32, p []byte) {
	dst = dst[:3*len(p)]
	for i, v := range p {
		f := unit[v]
		d := dst[3*i : 3*i+3 : 3*i+3]
		d[0], d[1], d[2] = f, f, f
	}
}

// to8 turns a value in [0,1] into a byte, rounding to nearest; values
// outside [0,1] (and NaN) are clamped.
func to8(v float32) uint8 {
	if !(v > 0) { // also NaN
		return 0
	}
	if v >= 1 {
		return 255
	}
	return uint8(float32(v*255) + 0.5) // rounded product: no fused multiply-add
}

func (t *Tokenizer) assemble(ts *TokenSet, dst *image.RGBA) error {
	g := t.g
	b := dst.Bounds()
	if b.Dx() != g.OutW || b.Dy() != g.OutH {
		return fmt.Errorf("assemble: frame is %dx%d, grid covers %dx%d", b.Dx(), b.Dy(), g.OutW, g.OutH)
	}
	if ts.D != g.D() {
		return fmt.Errorf("assemble: tokens hold %d values, grid wants %d", ts.D, g.D())
	}
	if ts.N < 0 || ts.N > len(ts.Pos) || ts.N*ts.D > len(ts.Data) {
		return fmt.Errorf("assemble: token set claims %d tokens but has room for %d", ts.N, min(len(ts.Pos), len(ts.Data)/max(ts.D, 1)))
	}
	if !g.Overlapping() && t.assembleTiles(ts, dst) {
		return nil
	}
	C, pw, ph, W := g.Channels, g.PatchW, g.PatchH, g.OutW
	npx := g.OutW * g.OutH
	if len(t.sum) != npx*C {
		t.sum = make([]float32, npx*C)
		t.cnt = make([]uint32, npx)
	}
	sum, cnt := t.sum, t.cnt
	clear(sum)
	clear(cnt)
	for i := 0; i < ts.N; i++ {
		p := ts.Pos[i]
		if p.Row < 0 || p.Col < 0 || int(p.Row) >= g.Rows || int(p.Col) >= g.Cols {
			continue
		}
		tok := ts.Data[i*ts.D : (i+1)*ts.D]
		x0, y0 := int(p.Col)*g.StrideX, int(p.Row)*g.StrideY
		for py := 0; py < ph; py++ {
			o := (y0+py)*W + x0
			src := tok[py*pw*C : (py+1)*pw*C]
			acc := sum[o*C : (o+pw)*C]
			for k, v := range src {
				acc[k] += v
			}
			cs := cnt[o : o+pw]
			for k := range cs {
				cs[k]++
			}
		}
	}
	for y := 0; y < g.OutH; y++ {
		row := dst.Pix[dst.PixOffset(b.Min.X, b.Min.Y+y):]
		row = row[: 4*W : 4*W]
		for x := 0; x < W; x++ {
			o := y*W + x
			px := row[4*x : 4*x+4 : 4*x+4]
			px[3] = 255
			n := cnt[o]
			if n == 0 {
				px[0], px[1], px[2] = 0, 0, 0
				continue
			}
			if C == 1 {
				v := sum[o]
				if n > 1 {
					v /= float32(n)
				}
				c := to8(v)
				px[0], px[1], px[2] = c, c, c
				continue
			}
			s := sum[3*o : 3*o+3 : 3*o+3]
			if n == 1 {
				px[0], px[1], px[2] = to8(s[0]), to8(s[1]), to8(s[2])
			} else {
				f := float32(n)
				px[0], px[1], px[2] = to8(s[0]/f), to8(s[1]/f), to8(s[2]/f)
			}
		}
	}
	return nil
}

// assembleTiles is Assemble for non-overlapping grids when no cell holds
// more than one token (no duplicates): each token is written straight to
// its cell, empty cells black. It reports false, having written nothing,
// when some cell holds several tokens.
func (t *Tokenizer) assembleTiles(ts *TokenSet, dst *image.RGBA) bool {
	g := t.g
	N := g.N()
	if len(t.cellTok) != N {
		t.cellTok = make([]int32, N)
	}
	for c := range t.cellTok {
		t.cellTok[c] = -1
	}
	for i := 0; i < ts.N; i++ {
		p := ts.Pos[i]
		if p.Row < 0 || p.Col < 0 || int(p.Row) >= g.Rows || int(p.Col) >= g.Cols {
			continue
		}
		c := int(p.Row)*g.Cols + int(p.Col)
		if t.cellTok[c] >= 0 {
			return false
		}
		t.cellTok[c] = int32(i)
	}
	C, pw, ph, D := g.Channels, g.PatchW, g.PatchH, ts.D
	b := dst.Bounds()
	for c, i := range t.cellTok {
		x0, y0 := (c%g.Cols)*pw, (c/g.Cols)*ph
		for py := 0; py < ph; py++ {
			o := dst.PixOffset(b.Min.X+x0, b.Min.Y+y0+py)
			row := dst.Pix[o : o+4*pw : o+4*pw]
			if i < 0 {
				for x := 0; x < pw; x++ {
					px := row[4*x : 4*x+4 : 4*x+4]
					px[0], px[1], px[2], px[3] = 0, 0, 0, 255
				}
				continue
			}
			vals := ts.Data[int(i)*D+py*pw*C : int(i)*D+(py+1)*pw*C]
			if C == 3 {
				tileRow3(row, vals, pw)
				continue
			}
			for x := 0; x < pw; x++ {
				px := row[4*x : 4*x+4 : 4*x+4]
				y := to8(vals[x])
				px[0], px[1], px[2], px[3] = y, y, y, 255
			}
		}
	}
	return true
}

// tileRow3 writes pw RGB values of vals as opaque RGBA pixels into row.
func tileRow3(row []byte, vals []float32, pw int) {
	if pw <= 0 || len(row) < 4*pw || len(vals) < 3*pw {
		return
	}
	// Pointer arithmetic inside the two slices, checked above.
	rp, vp := unsafe.Pointer(&row[0]), unsafe.Pointer(&vals[0])
	for x := 0; x < pw; x++ {
		v := (*[3]float32)(unsafe.Add(vp, 12*x))
		px := (*[4]byte)(unsafe.Add(rp, 4*x))
		px[0], px[1], px[2], px[3] = to8(v[0]), to8(v[1]), to8(v[2]), 255
	}
}

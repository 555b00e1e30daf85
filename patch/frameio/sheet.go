package frameio

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"image/draw"
	"image/png"
	"io"

	xdraw "golang.org/x/image/draw"
	"golang.org/x/image/font"
	"golang.org/x/image/font/basicfont"
	"golang.org/x/image/math/fixed"

	"tilebench/patch"
)

// SheetConfig lays out a contact sheet. The zero value is useful.
type SheetConfig struct {
	// MaxFrames is the most frames shown (default 16). When Total is
	// known the frames shown are spread evenly over the sequence (first
	// and last included); otherwise the first MaxFrames are shown.
	MaxFrames int
	// Total is the sequence length, if known (0 or less: unknown).
	Total int
	// Columns is the number of original/transformed pairs in a row
	// (default 4).
	Columns int
	// Scale enlarges every pixel to Scale×Scale (default 2).
	Scale int
	// Grid, when set, draws the patch grid's cell boundaries over both
	// panels of each pair.
	Grid *patch.Grid
}

// Sheet is a contact sheet: for each shown frame the original beside the
// transformed frame, with the frame index underneath.
type Sheet struct {
	cfg   SheetConfig
	want  map[int]bool
	pairs []sheetPair
}

type sheetPair struct {
	index     int
	orig, out *image.RGBA
}

// Colours of the sheet (our own choice).
var (
	sheetBack = color.RGBA{30, 33, 38, 0xff}
	sheetText = color.RGBA{214, 218, 224, 0xff}
)

// NewSheet starts a contact sheet.
func NewSheet(cfg SheetConfig) *Sheet {
	if cfg.MaxFrames <= 0 {
		cfg.MaxFrames = 16
	}
	if cfg.Columns <= 0 {
		cfg.Columns = 4
	}
	if cfg.Scale <= 0 {
		cfg.Scale = 2
	}
	s := &Sheet{cfg: cfg}
	if cfg.Total > cfg.MaxFrames {
		s.want = map[int]bool{}
		m := cfg.MaxFrames
		for k := 0; k < m; k++ {
			if m == 1 {
				s.want[0] = true
				break
			}
			s.want[(k*(cfg.Total-1)+(m-1)/2)/(m-1)] = true
		}
	}
	return s
}

// Wants reports whether frame index is one the sheet shows.
func (s *Sheet) Wants(index int) bool {
	if s.want != nil {
		return s.want[index]
	}
	return len(s.pairs) < s.cfg.MaxFrames
}

// Add offers frame index (original and transformed); the sheet keeps a
// copy if it shows that frame.
func (s *Sheet) Add(index int, orig, out image.Image) {
	if !s.Wants(index) {
		return
	}
	s.pairs = append(s.pairs, sheetPair{index: index, orig: cloneRGBA(orig), out: cloneRGBA(out)})
}

func cloneRGBA(img image.Image) *image.RGBA {
	b := img.Bounds()
	c := image.NewRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	draw.Draw(c, c.Bounds(), img, b.Min, draw.Src)
	return c
}

// Image draws the sheet.
func (s *Sheet) Image() (*image.RGBA, error) {
	if len(s.pairs) == 0 {
		return nil, errors.New("sheet: no frames")
	}
	k := s.cfg.Scale
	ow, oh, tw, th := 0, 0, 0, 0
	for _, p := range s.pairs {
		ow, oh = max(ow, p.orig.Rect.Dx()), max(oh, p.orig.Rect.Dy())
		tw, th = max(tw, p.out.Rect.Dx()), max(th, p.out.Rect.Dy())
	}
	const gap, margin, label = 4, 8, 16
	pairW := k*ow + gap + k*tw
	pairH := k*max(oh, th) + label
	cols := min(s.cfg.Columns, len(s.pairs))
	rows := (len(s.pairs) + cols - 1) / cols
	W := margin + cols*(pairW+margin)
	H := margin + rows*(pairH+margin)
	if W > MaxSide*2 || H > MaxSide*2 {
		return nil, fmt.Errorf("sheet: %dx%d pixels is too large (use fewer frames or a smaller scale)", W, H)
	}
	img := image.NewRGBA(image.Rect(0, 0, W, H))
	draw.Draw(img, img.Bounds(), image.NewUniform(sheetBack), image.Point{}, draw.Src)
	face := basicfont.Face7x13
	for n, p := range s.pairs {
		x0 := margin + (n%cols)*(pairW+margin)
		y0 := margin + (n/cols)*(pairH+margin)
		ro := image.Rect(x0, y0, x0+k*p.orig.Rect.Dx(), y0+k*p.orig.Rect.Dy())
		rt := image.Rect(x0+k*ow+gap, y0, x0+k*ow+gap+k*p.out.Rect.Dx(), y0+k*p.out.Rect.Dy())
		xdraw.NearestNeighbor.Scale(img, ro, p.orig, p.orig.Rect, xdraw.Src, nil)
		xdraw.NearestNeighbor.Scale(img, rt, p.out, p.out.Rect, xdraw.Src, nil)
		if g := s.cfg.Grid; g != nil {
			gridLines(img, ro, g, k)
			gridLines(img, rt, g, k)
		}
		d := font.Drawer{Dst: img, Src: image.NewUniform(sheetText), Face: face,
			Dot: fixed.P(x0, y0+k*max(oh, th)+face.Ascent+2)}
		d.DrawString(fmt.Sprintf("frame %d", p.index))
	}
	return img, nil
}

// gridLines draws the boundaries of g's cells (every stride) inside r,
// which shows a frame enlarged k times, as a half-strength lightening so
// that the pixels stay readable under the line.
func gridLines(img *image.RGBA, r image.Rectangle, g *patch.Grid, k int) {
	light := func(x, y int) {
		o := img.PixOffset(x, y)
		for c := 0; c < 3; c++ {
			img.Pix[o+c] = uint8((int(img.Pix[o+c]) + 255) / 2)
		}
	}
	for x := g.StrideX; x < r.Dx()/k; x += g.StrideX {
		for y := r.Min.Y; y < r.Max.Y; y++ {
			light(r.Min.X+x*k, y)
		}
	}
	for y := g.StrideY; y < r.Dy()/k; y += g.StrideY {
		for x := r.Min.X; x < r.Max.X; x++ {
			if (x-r.Min.X)%(g.StrideX*k) != 0 {
				light(x, r.Min.Y+y*k)
			}
		}
	}
}

// Encode writes the sheet as PNG.
func (s *Sheet) Encode(w io.Writer) error {
	img, err := s.Image()
	if err != nil {
		return err
	}
	return png.Encode(w, img)
}

package overlay

import (
	"image"
	"image/color"
	"math"

	"tilebench/patch"
)

// The overlay's colours. Cells are dimmed towards a deep ink by how little
// attention they drew and washed with amber by how much, so the heat reads
// on a light or dark, green, grey or blue frame alike; outlines are two
// rings, ink outside and bright cyan inside, visible on any background.
var (
	// Amber is the tint of the most attended cell.
	Amber = color.RGBA{R: 255, G: 176, B: 0, A: 255}
	// Ink is what unattended cells are dimmed towards.
	Ink = color.RGBA{R: 16, G: 12, B: 40, A: 255}
	// Ring is the inner outline colour of the top cells.
	Ring = color.RGBA{R: 0, G: 232, B: 255, A: 255}
)

const (
	// dimFloor is how much of a cell's own colour is kept at weight 0.
	dimFloor = 0.35
	// amberMax is the share of amber at the largest weight.
	amberMax = 0.45
)

// Drawer draws overlays with buffers it keeps; one Drawer serves one
// goroutine and draws without allocating once it has seen the largest
// frame and grid.
type Drawer struct {
	heat  []float32 // per pixel: the largest normalised weight covering it
	order []int     // cell indices, top first
}

// Draw draws spec over img (in place), whose pixels are laid out as grid g
// cuts frames: cell p covers g.Rect(p), clipped to img. cells holds one
// weight per cell of g (SeenCells, SourceCells). Nothing is drawn when
// every weight is zero.
func (d *Drawer) Draw(img *image.RGBA, g *patch.Grid, cells []float32, spec Spec) {
	if !spec.On() || len(cells) < g.N() {
		return
	}
	cells = cells[:g.N()]
	var mx float32
	for _, v := range cells {
		if v > mx && !math.IsInf(float64(v), 0) {
			mx = v
		}
	}
	if !(mx > 0) {
		return
	}
	b := img.Rect
	if spec.Heat {
		d.tint(img, g, cells, mx)
	}
	if spec.Top > 0 {
		k := d.top(cells, spec.Top)
		// Draw the least attended of the K first so that the most
		// attended outline is on top where outlines touch.
		for r := k - 1; r >= 0; r-- {
			rect := g.Rect(g.Cell(d.order[r])).Add(b.Min).Intersect(b)
			outline(img, rect)
		}
	}
}

// tint applies the heat to every pixel: out = pix·f·(1−a) + Amber·a with
// f = dimFloor + (1−dimFloor)·t towards Ink, a = amberMax·t, and t the
// largest normalised weight of the cells covering the pixel.
func (d *Drawer) tint(img *image.RGBA, g *patch.Grid, cells []float32, mx float32) {
	b := img.Rect
	w, h := b.Dx(), b.Dy()
	if cap(d.heat) < w*h {
		d.heat = make([]float32, w*h)
	}
	heat := d.heat[:w*h]
	for i := range heat {
		heat[i] = -1 // no cell covers it
	}
	inv := 1 / mx
	for c, v := range cells {
		t := v * inv
		if !(t >= 0) {
			t = 0
		}
		r := g.Rect(g.Cell(c)).Intersect(image.Rect(0, 0, w, h))
		for y := r.Min.Y; y < r.Max.Y; y++ {
			row := heat[y*w : (y+1)*w]
			for x := r.Min.X; x < r.Max.X; x++ {
				if t > row[x] {
					row[x] = t
				}
			}
		}
	}
	ir, ig, ib := float32(Ink.R), float32(Ink.G), float32(Ink.B)
	ar, ag, ab := float32(Amber.R), float32(Amber.G), float32(Amber.B)
	for y := 0; y < h; y++ {
		pix := img.Pix[y*img.Stride : y*img.Stride+4*w]
		row := heat[y*w : (y+1)*w]
		for x, t := range row {
			if t < 0 {
				continue
			}
			f := dimFloor + (1-dimFloor)*t
			a := amberMax * t
			keep := f * (1 - a)
			ink := (1 - f) * (1 - a)
			p := pix[4*x : 4*x+4 : 4*x+4]
			p[0] = clampByte(float32(p[0])*keep + ir*ink + ar*a)
			p[1] = clampByte(float32(p[1])*keep + ig*ink + ag*a)
			p[2] = clampByte(float32(p[2])*keep + ib*ink + ab*a)
			p[3] = 255
		}
	}
}

func clampByte(v float32) uint8 {
	if v <= 0 {
		return 0
	}
	if v >= 255 {
		return 255
	}
	return uint8(v + 0.5)
}

// top fills d.order with the indices of the k largest positive weights,
// largest first (ties: the lower cell index first), and returns how many
// there are (at most k). Selection by insertion into the first k slots.
func (d *Drawer) top(cells []float32, k int) int {
	if k > len(cells) {
		k = len(cells)
	}
	if cap(d.order) < k {
		d.order = make([]int, k)
	}
	ord := d.order[:0]
	for c, v := range cells {
		if !(v > 0) {
			continue
		}
		if len(ord) == k && v <= cells[ord[k-1]] {
			continue
		}
		if len(ord) < k {
			ord = append(ord, c)
		} else {
			ord[k-1] = c
		}
		for i := len(ord) - 1; i > 0 && cells[ord[i]] > cells[ord[i-1]]; i-- {
			ord[i], ord[i-1] = ord[i-1], ord[i]
		}
	}
	d.order = ord
	return len(ord)
}

// outline draws two rings just inside r: Ink on the border pixels, Ring
// one pixel in (one ring of Ring only for cells under 4 pixels).
func outline(img *image.RGBA, r image.Rectangle) {
	if r.Empty() {
		return
	}
	if r.Dx() < 4 || r.Dy() < 4 {
		ring(img, r, Ring)
		return
	}
	ring(img, r, Ink)
	ring(img, r.Inset(1), Ring)
}

func ring(img *image.RGBA, r image.Rectangle, c color.RGBA) {
	for x := r.Min.X; x < r.Max.X; x++ {
		img.SetRGBA(x, r.Min.Y, c)
		img.SetRGBA(x, r.Max.Y-1, c)
	}
	for y := r.Min.Y; y < r.Max.Y; y++ {
		img.SetRGBA(r.Min.X, y, c)
		img.SetRGBA(r.Max.X-1, y, c)
	}
}

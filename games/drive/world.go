package drive

import (
	"image"
	"image/color"
	"image/draw"
	"math"

	"golang.org/x/image/vector"

	"tilebench/internal/seeds"
)

// Palette is the set of colours one look of the game is drawn with.
type Palette struct {
	// Name is the palette's variation name.
	Name string
	// Terrain is the ground away from the road; Texture the second ground
	// tone mixed in by the terrain-noise variation.
	Terrain, Texture color.RGBA
	// Road is the driving surface, Seam the soft continuous line along its
	// middle, Edge the solid band on both road edges (also the start band).
	Road, Seam, Edge color.RGBA
	// Body and Cabin are the car's colours.
	Body, Cabin color.RGBA
	// Shapes colour the scattered distractor shapes.
	Shapes [3]color.RGBA
}

func rgb(r, g, b uint8) color.RGBA { return color.RGBA{r, g, b, 255} }

// Palettes lists every palette; the first ("ember") is the training
// palette, the others are held out for generalisation tests.
var Palettes = []Palette{
	{
		Name: "ember", Terrain: rgb(58, 34, 66), Texture: rgb(92, 52, 88),
		Road: rgb(226, 170, 112), Seam: rgb(240, 196, 146), Edge: rgb(38, 150, 140),
		Body: rgb(24, 44, 92), Cabin: rgb(150, 214, 236),
		Shapes: [3]color.RGBA{rgb(196, 80, 92), rgb(112, 76, 148), rgb(214, 130, 70)},
	},
	{
		Name: "glacier", Terrain: rgb(34, 62, 92), Texture: rgb(62, 98, 128),
		Road: rgb(200, 194, 232), Seam: rgb(222, 218, 246), Edge: rgb(230, 110, 80),
		Body: rgb(120, 24, 48), Cabin: rgb(250, 220, 160),
		Shapes: [3]color.RGBA{rgb(120, 170, 200), rgb(240, 240, 250), rgb(90, 120, 180)},
	},
	{
		Name: "saffron", Terrain: rgb(128, 92, 30), Texture: rgb(168, 126, 48),
		Road: rgb(30, 80, 96), Seam: rgb(46, 104, 120), Edge: rgb(244, 232, 200),
		Body: rgb(220, 60, 160), Cabin: rgb(255, 236, 120),
		Shapes: [3]color.RGBA{rgb(200, 70, 40), rgb(90, 60, 20), rgb(230, 190, 90)},
	},
	{
		Name: "ember", Terrain: rgb(20, 18, 44), Texture: rgb(42, 36, 80),
		Road: rgb(140, 58, 44), Seam: rgb(166, 80, 60), Edge: rgb(234, 196, 106),
		Body: rgb(236, 236, 240), Cabin: rgb(60, 200, 210),
		Shapes: [3]color.RGBA{rgb(80, 60, 140), rgb(200, 90, 160), rgb(60, 110, 120)},
	},
}

// world is the circuit rasterised once per episode, as packed RGBA words
// (R in the low byte, the byte order of image.RGBA.Pix).
type world struct {
	pix        []uint32
	w, h       int
	ppm        float64 // pixels per metre
	minX, maxY float64 // world coordinates of the image's top-left corner
	border     uint32
}

func pack(c color.RGBA) uint32 {
	return uint32(c.R) | uint32(c.G)<<8 | uint32(c.B)<<16 | uint32(c.A)<<24
}

// worldLook is what the variation chooses about the world image.
type worldLook struct {
	pal       Palette
	shapes    int     // number of distractor shapes
	noise     float64 // terrain texture strength in [0,1]
	edgeWidth float64 // metres
}

const (
	worldMargin = 44.0 // metres of terrain around the circuit's bounding box
	roadPad     = 12.0 // metres around the centreline's box that the road layers may cover
)

// rasterise draws tr into a world image at ppm pixels per metre.
func rasterise(tr *Track, look worldLook, ppm float64, seed uint64) *world {
	minX, minY := math.Inf(1), math.Inf(1)
	maxX, maxY := math.Inf(-1), math.Inf(-1)
	for _, p := range tr.Pts {
		minX, maxX = math.Min(minX, p.X), math.Max(maxX, p.X)
		minY, maxY = math.Min(minY, p.Y), math.Max(maxY, p.Y)
	}
	minX -= worldMargin
	minY -= worldMargin
	maxX += worldMargin
	maxY += worldMargin
	w := int(math.Ceil((maxX - minX) * ppm))
	h := int(math.Ceil((maxY - minY) * ppm))
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	wd := &world{w: w, h: h, ppm: ppm, minX: minX, maxY: maxY, border: pack(look.pal.Terrain)}
	toPx := func(p Vec) (float32, float32) {
		return float32((p.X - minX) * ppm), float32((maxY - p.Y) * ppm)
	}

	// Terrain, with optional two-octave value noise blending towards the
	// texture tone.
	draw.Draw(img, img.Bounds(), image.NewUniform(look.pal.Terrain), image.Point{}, draw.Src)
	if look.noise > 0 {
		n1 := newValueNoise(seeds.DeriveSeed(seed, seeds.StreamKey("terrain"), 1), 9)
		n2 := newValueNoise(seeds.DeriveSeed(seed, seeds.StreamKey("terrain"), 2), 2.5)
		a, b := look.pal.Terrain, look.pal.Texture
		for y := 0; y < h; y++ {
			wy := maxY - (float64(y)+0.5)/ppm
			row := img.Pix[y*img.Stride:]
			for x := 0; x < w; x++ {
				wx := minX + (float64(x)+0.5)/ppm
				t := 0.65*n1.at(wx, wy) + 0.35*n2.at(wx, wy)
				t = look.noise * smooth(math.Max(0, math.Min(1, (t-0.35)*2.2)))
				row[4*x] = lerp8(a.R, b.R, t)
				row[4*x+1] = lerp8(a.G, b.G, t)
				row[4*x+2] = lerp8(a.B, b.B, t)
			}
		}
	}

	// Each layer is rasterised into an alpha mask (the rasteriser's plain
	// coverage path) and blended in by hand where the mask is not empty.
	// The road layers use a rasteriser over the circuit's bounding box
	// only; the terrain shapes one over the whole image.
	full := image.Rect(0, 0, w, h)
	roadR := image.Rect(int((worldMargin-roadPad)*ppm), int((worldMargin-roadPad)*ppm),
		w-int((worldMargin-roadPad)*ppm), h-int((worldMargin-roadPad)*ppm)).Intersect(full)
	mask := image.NewAlpha(full)
	fillIn := func(r *vector.Rasterizer, area image.Rectangle, c color.RGBA) {
		r.DrawOp = draw.Src
		m := mask.SubImage(area).(*image.Alpha)
		r.Draw(m, area, image.Opaque, image.Point{})
		r.Reset(area.Dx(), area.Dy())
		for y := area.Min.Y; y < area.Max.Y; y++ {
			mrow := mask.Pix[mask.PixOffset(area.Min.X, y):mask.PixOffset(area.Max.X, y)]
			prow := img.Pix[img.PixOffset(area.Min.X, y):]
			for x, a := range mrow {
				if a == 0 {
					continue
				}
				px := prow[4*x : 4*x+3 : 4*x+3]
				if a == 255 {
					px[0], px[1], px[2] = c.R, c.G, c.B
					continue
				}
				k := uint32(a)
				px[0] = uint8((uint32(px[0])*(255-k) + uint32(c.R)*k + 127) / 255)
				px[1] = uint8((uint32(px[1])*(255-k) + uint32(c.G)*k + 127) / 255)
				px[2] = uint8((uint32(px[2])*(255-k) + uint32(c.B)*k + 127) / 255)
			}
		}
	}

	// Distractor shapes, kept clear of the road, filled one colour at a
	// time (one rasteriser pass per colour).
	if look.shapes > 0 {
		r := vector.NewRasterizer(w, h)
		type shape struct {
			c            Vec
			size, rot    float64
			kind, colour int
		}
		var shapes []shape
		rng := seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("shapes")))
		clear := tr.Width/2 + look.edgeWidth + 1.5
		for tries := 0; len(shapes) < look.shapes && tries < look.shapes*20; tries++ {
			sh := shape{size: 1.2 + 2.6*rng.Float64()}
			sh.c = Vec{minX + (maxX-minX)*rng.Float64(), minY + (maxY-minY)*rng.Float64()}
			sh.kind = rng.IntN(3)
			sh.rot = 2 * math.Pi * rng.Float64()
			sh.colour = rng.IntN(len(look.pal.Shapes))
			if _, _, lat := tr.Project(sh.c, 0, 0); math.Abs(lat) >= clear+sh.size {
				shapes = append(shapes, sh)
			}
		}
		for colour, col := range look.pal.Shapes {
			for _, sh := range shapes {
				if sh.colour != colour {
					continue
				}
				switch sh.kind {
				case 0: // disc
					polygon(r, toPx, sh.c, sh.size, sh.rot, 20, false)
				case 1: // triangle
					polygon(r, toPx, sh.c, sh.size, sh.rot, 3, false)
				default: // ring: a pentagon with a pentagonal hole
					polygon(r, toPx, sh.c, sh.size, sh.rot, 5, false)
					polygon(r, toPx, sh.c, sh.size*0.5, sh.rot, 5, true)
				}
			}
			fillIn(r, full, col)
		}
	}

	// Road: a darker shoulder, edge band, surface, seam, then the start
	// band across.
	r := vector.NewRasterizer(roadR.Dx(), roadR.Dy())
	ox, oy := float32(roadR.Min.X), float32(roadR.Min.Y)
	toPx = func(p Vec) (float32, float32) {
		return float32((p.X-minX)*ppm) - ox, float32((maxY-p.Y)*ppm) - oy
	}
	fill := func(c color.RGBA) { fillIn(r, roadR, c) }
	band(r, toPx, tr, tr.Width/2+look.edgeWidth+1.4)
	fill(shade(look.pal.Terrain, 0.72))
	band(r, toPx, tr, tr.Width/2+look.edgeWidth)
	fill(look.pal.Edge)
	band(r, toPx, tr, tr.Width/2)
	fill(look.pal.Road)
	band(r, toPx, tr, 0.3)
	fill(look.pal.Seam)
	p0, _, _ := tr.Eval(0, 0)
	_, d, _ := tr.Eval(0, 0)
	t := d.scale(1 / d.norm())
	nrm := Vec{-t.Y, t.X}
	hw := tr.Width/2 + look.edgeWidth*0.5
	quadrilateral(r, toPx, p0.add(nrm.scale(hw)).sub(t.scale(0.6)), p0.add(nrm.scale(hw)).add(t.scale(0.6)),
		p0.sub(nrm.scale(hw)).add(t.scale(0.6)), p0.sub(nrm.scale(hw)).sub(t.scale(0.6)))
	fill(look.pal.Edge)

	wd.pix = make([]uint32, w*h)
	for y := 0; y < h; y++ {
		row := img.Pix[y*img.Stride:]
		for x := 0; x < w; x++ {
			wd.pix[y*w+x] = uint32(row[4*x]) | uint32(row[4*x+1])<<8 | uint32(row[4*x+2])<<16 | 0xff<<24
		}
	}
	return wd
}

// band adds to r the ring between the offsets ±half of the centreline:
// the outer loop one way round, the inner loop the other, so the
// rasteriser's winding leaves the middle empty.
func band(r *vector.Rasterizer, toPx func(Vec) (float32, float32), tr *Track, half float64) {
	n := len(tr.Pts)
	normal := func(i int) Vec {
		d := tr.Pts[(i+1)%n].sub(tr.Pts[(i-1+n)%n])
		d = d.scale(1 / d.norm())
		return Vec{-d.Y, d.X}
	}
	for side, sign := range []float64{1, -1} {
		for k := 0; k <= n; k++ {
			i := k % n
			if side == 1 {
				i = (n - k) % n
			}
			x, y := toPx(tr.Pts[i].add(normal(i).scale(sign * half)))
			if k == 0 {
				r.MoveTo(x, y)
			} else {
				r.LineTo(x, y)
			}
		}
		r.ClosePath()
	}
}

// polygon adds a regular polygon of the given radius and rotation to r;
// rev traces it the other way round (a hole under the winding rule).
func polygon(r *vector.Rasterizer, toPx func(Vec) (float32, float32), c Vec, rad, rot float64, sides int, rev bool) {
	for k := 0; k <= sides; k++ {
		kk := k
		if rev {
			kk = sides - k
		}
		a := rot + 2*math.Pi*float64(kk)/float64(sides)
		x, y := toPx(c.add(Vec{rad * math.Cos(a), rad * math.Sin(a)}))
		if k == 0 {
			r.MoveTo(x, y)
		} else {
			r.LineTo(x, y)
		}
	}
	r.ClosePath()
}

func quadrilateral(r *vector.Rasterizer, toPx func(Vec) (float32, float32), a, b, c, d Vec) {
	x, y := toPx(a)
	r.MoveTo(x, y)
	for _, p := range []Vec{b, c, d} {
		x, y = toPx(p)
		r.LineTo(x, y)
	}
	r.ClosePath()
}

// valueNoise is lattice value noise with smoothstep interpolation.
type valueNoise struct {
	cell float64
	vals [64 * 64]float64
}

func newValueNoise(seed uint64, cell float64) *valueNoise {
	n := &valueNoise{cell: cell}
	rng := seeds.NewRand(seed)
	for i := range n.vals {
		n.vals[i] = rng.Float64()
	}
	return n
}

func (n *valueNoise) at(x, y float64) float64 {
	fx, fy := x/n.cell, y/n.cell
	ix, iy := math.Floor(fx), math.Floor(fy)
	tx, ty := smooth(fx-ix), smooth(fy-iy)
	i, j := int(ix)&63, int(iy)&63
	v := func(a, b int) float64 { return n.vals[((j+b)&63)*64+((i+a)&63)] }
	top := v(0, 0) + (v(1, 0)-v(0, 0))*tx
	bot := v(0, 1) + (v(1, 1)-v(0, 1))*tx
	return top + (bot-top)*ty
}

// shade scales a colour's channels by k.
func shade(c color.RGBA, k float64) color.RGBA {
	return color.RGBA{uint8(float64(c.R) * k), uint8(float64(c.G) * k), uint8(float64(c.B) * k), 255}
}

func smooth(t float64) float64 { return t * t * (3 - 2*t) }

func lerp8(a, b uint8, t float64) uint8 {
	return uint8(math.Round(float64(a) + (float64(b)-float64(a))*t))
}

package drive

import (
	"image"
	"image/color"
	"math"

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

// Palettes lists every palette; the first ("heather") is the training
// palette, the others are held out for generalisation tests.
var Palettes = []Palette{
	{
		Name: "heather", Terrain: rgb(58, 34, 66), Texture: rgb(92, 52, 88),
		Road: rgb(226, 170, 112), Seam: rgb(240, 196, 146), Edge: rgb(38, 150, 140),
		Body: rgb(24, 44, 92), Cabin: rgb(150, 214, 236),
		Shapes: [3]color.RGBA{rgb(196, 80, 92), rgb(112, 76, 148), rgb(214, 130, 70)},
	},
	{
		Name: "tarn", Terrain: rgb(34, 62, 92), Texture: rgb(62, 98, 128),
		Road: rgb(200, 194, 232), Seam: rgb(222, 218, 246), Edge: rgb(230, 110, 80),
		Body: rgb(120, 24, 48), Cabin: rgb(250, 220, 160),
		Shapes: [3]color.RGBA{rgb(120, 170, 200), rgb(240, 240, 250), rgb(90, 120, 180)},
	},
	{
		Name: "ochre", Terrain: rgb(128, 92, 30), Texture: rgb(168, 126, 48),
		Road: rgb(30, 80, 96), Seam: rgb(46, 104, 120), Edge: rgb(244, 232, 200),
		Body: rgb(220, 60, 160), Cabin: rgb(255, 236, 120),
		Shapes: [3]color.RGBA{rgb(200, 70, 40), rgb(90, 60, 20), rgb(230, 190, 90)},
	},
	{
		Name: "cinder", Terrain: rgb(20, 18, 44), Texture: rgb(42, 36, 80),
		Road: rgb(140, 58, 44), Seam: rgb(166, 80, 60), Edge: rgb(234, 196, 106),
		Body: rgb(236, 236, 240), Cabin: rgb(60, 200, 210),
		Shapes: [3]color.RGBA{rgb(80, 60, 140), rgb(200, 90, 160), rgb(60, 110, 120)},
	},
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
	// worldMargin is the terrain kept round the largest circuit box, in
	// metres: more than the view reaches from a car on the road.
	worldMargin = 44.0
	// shoulder is the width of the darker ground strip outside the edge
	// bands, in metres.
	shoulder = 1.4
	// seamHalf is half the width of the seam along the road's middle.
	seamHalf = 0.3
	// stampStep is the spacing of the polyline the road is stamped from,
	// in metres (its chords stray at most 4/(8·16) m from a bend of the
	// smallest radius).
	stampStep = 2.0
	// chunkSegs is how many stamping segments make one lazily drawn
	// stretch of road.
	chunkSegs = 10
	// texSide is the side of the terrain texture tile in pixels (a power
	// of two: the tile repeats).
	texSide = 512
)

// world is the ground round one circuit as packed RGBA words (R in the
// low byte, the byte order of image.RGBA.Pix), in a buffer sized once per
// game for the largest circuit and reused by every episode.
//
// Nothing is drawn at Reset beyond the distractor shapes: the road is
// stamped stretch by stretch (chunks) when a frame first needs it, and
// the next Reset restores only the pixels the last episode wrote.
type world struct {
	pix        []uint32
	w, h       int
	ppm        float64 // pixels per metre
	minX, maxY float64 // world coordinates of the image's top-left corner
	border     uint32
	look       worldLook
	flat       uint32   // terrain colour when there is no texture
	tex        []uint32 // texSide² terrain tile, nil for flat ground

	// Per-pixel stamping state: gen[p] == cur marks pixels written this
	// episode, best[p] their smallest distance from the road edge.
	gen     []uint32
	best    []float32
	cur     uint32
	touched []int32

	// The stamping polyline (a subset of the centreline samples with
	// their half widths) and its chunks.
	sp      []Vec
	sh      []float64
	chunks  []chunk
	started bool // the start band is drawn
	// colours, packed
	cShoulder, cEdge, cRoad, cSeam uint32
}

type chunk struct {
	lo, hi int // stamping segments [lo, hi)
	box    image.Rectangle
	done   bool
}

// newWorld allocates the world buffer for circuits of at most extent
// metres a side at ppm pixels per metre.
func newWorld(look worldLook, ppm, extent float64) *world {
	side := int(math.Ceil((extent + 2*worldMargin) * ppm))
	wd := &world{w: side, h: side, ppm: ppm, look: look, border: pack(look.pal.Terrain), flat: pack(look.pal.Terrain)}
	wd.pix = make([]uint32, side*side)
	wd.gen = make([]uint32, side*side)
	wd.best = make([]float32, side*side)
	if look.noise > 0 {
		wd.tex = terrainTile(look)
	}
	for y := 0; y < side; y++ {
		row := wd.pix[y*side : (y+1)*side]
		for x := range row {
			row[x] = wd.terrainAt(x, y)
		}
	}
	wd.cShoulder = pack(shade(look.pal.Terrain, 0.72))
	wd.cEdge, wd.cRoad, wd.cSeam = pack(look.pal.Edge), pack(look.pal.Road), pack(look.pal.Seam)
	return wd
}

// terrainAt is the bare ground colour of buffer pixel (x, y).
func (wd *world) terrainAt(x, y int) uint32 {
	if wd.tex == nil {
		return wd.flat
	}
	return wd.tex[(y&(texSide-1))*texSide+(x&(texSide-1))]
}

// terrainTile is the repeating ground texture: two octaves of lattice
// value noise with periods that divide the tile, blending the terrain
// tone towards the texture tone.
func terrainTile(look worldLook) []uint32 {
	n1 := newValueNoise(seeds.DeriveSeed(0, seeds.StreamKey("terrain"), 1), 32)
	n2 := newValueNoise(seeds.DeriveSeed(0, seeds.StreamKey("terrain"), 2), 8)
	a, b := look.pal.Terrain, look.pal.Texture
	tex := make([]uint32, texSide*texSide)
	for y := 0; y < texSide; y++ {
		for x := 0; x < texSide; x++ {
			t := 0.65*n1.at(float64(x)+0.5, float64(y)+0.5) + 0.35*n2.at(float64(x)+0.5, float64(y)+0.5)
			t = look.noise * smooth(math.Max(0, math.Min(1, (t-0.35)*2.2)))
			tex[y*texSide+x] = uint32(lerp8(a.R, b.R, t)) | uint32(lerp8(a.G, b.G, t))<<8 | uint32(lerp8(a.B, b.B, t))<<16 | 0xff<<24
		}
	}
	return tex
}

// reset restores the pixels the last episode wrote, centres the buffer on
// tr, lays out the road's chunks and draws the distractor shapes.
func (wd *world) reset(tr *Track, seed uint64) {
	for _, p := range wd.touched {
		wd.pix[p] = wd.terrainAt(int(p)%wd.w, int(p)/wd.w)
	}
	wd.touched = wd.touched[:0]
	wd.cur++
	if wd.cur == 0 { // wrapped: forget every old mark
		clear(wd.gen)
		wd.cur = 1
	}
	cx, cy := (tr.Min.X+tr.Max.X)/2, (tr.Min.Y+tr.Max.Y)/2
	wd.minX = cx - float64(wd.w/2)/wd.ppm
	wd.maxY = cy + float64(wd.h/2)/wd.ppm

	// The stamping polyline: every k-th sample, closing on the first.
	k := int(math.Max(1, math.Round(stampStep/(tr.Length/float64(len(tr.Pts))))))
	wd.sp, wd.sh = wd.sp[:0], wd.sh[:0]
	for i := 0; i < len(tr.Pts); i += k {
		wd.sp = append(wd.sp, tr.Pts[i])
		wd.sh = append(wd.sh, tr.Half[i])
	}
	wd.sp = append(wd.sp, tr.Pts[0])
	wd.sh = append(wd.sh, tr.Half[0])
	nseg := len(wd.sp) - 1
	wd.chunks, wd.started = wd.chunks[:0], false
	for lo := 0; lo < nseg; lo += chunkSegs {
		hi := min(lo+chunkSegs, nseg)
		c := chunk{lo: lo, hi: hi}
		for i := lo; i < hi; i++ {
			q := wd.quad(i)
			for _, v := range q {
				r := image.Rect(int(math.Floor(v.X))-1, int(math.Floor(v.Y))-1, int(math.Ceil(v.X))+1, int(math.Ceil(v.Y))+1)
				c.box = c.box.Union(r)
			}
		}
		wd.chunks = append(wd.chunks, c)
	}
	if wd.look.shapes > 0 {
		wd.drawShapes(tr, seed)
	}
}

// reach is how far past the road's edge the stamp reaches, in metres.
func (wd *world) reach() float64 { return wd.look.edgeWidth + shoulder + 1.5/wd.ppm }

// toPx maps a world point to buffer pixel coordinates (not rounded).
func (wd *world) toPx(p Vec) Vec { return Vec{(p.X - wd.minX) * wd.ppm, (wd.maxY - p.Y) * wd.ppm} }

// normalAt is the unit normal of the stamping polyline at vertex i (the
// perpendicular of the chord through its neighbours).
func (wd *world) normalAt(i int) Vec {
	n := len(wd.sp) - 1 // the last vertex repeats the first
	a, b := wd.sp[(i-1+n)%n], wd.sp[(i+1)%n]
	d := b.sub(a)
	d = d.scale(1 / d.norm())
	return Vec{-d.Y, d.X}
}

// quad is the quadrilateral, in buffer pixels, that segment i's stamp
// covers: its ends pushed out along the vertex normals as far as the
// stamp reaches, so that consecutive quads leave no gap.
func (wd *world) quad(i int) [4]Vec {
	n0, n1 := wd.normalAt(i), wd.normalAt(i+1)
	r0, r1 := wd.sh[i]+wd.reach()+0.2, wd.sh[i+1]+wd.reach()+0.2
	a, b := wd.sp[i], wd.sp[i+1]
	return [4]Vec{
		wd.toPx(a.add(n0.scale(r0))), wd.toPx(b.add(n1.scale(r1))),
		wd.toPx(b.sub(n1.scale(r1))), wd.toPx(a.sub(n0.scale(r0))),
	}
}

// ensure stamps every chunk not yet drawn whose box meets r (buffer
// pixels), then the start band once both chunks beside it are drawn (any
// visible pixel of it lies in both chunks' boxes).
func (wd *world) ensure(r image.Rectangle, tr *Track) {
	start := false
	for k := range wd.chunks {
		c := &wd.chunks[k]
		if c.done || !c.box.Overlaps(r) {
			continue
		}
		for i := c.lo; i < c.hi; i++ {
			wd.stampSegment(i)
		}
		c.done = true
		start = true
	}
	if start && !wd.started && wd.chunks[0].done && wd.chunks[len(wd.chunks)-1].done {
		wd.stampStart(tr)
		wd.started = true
	}
}

// mark records that pixel p is written this episode and reports whether
// it was already.
func (wd *world) mark(p int) bool {
	if wd.gen[p] == wd.cur {
		return true
	}
	wd.gen[p] = wd.cur
	wd.touched = append(wd.touched, int32(p))
	return false
}

// stampSegment draws the road round stamping segment i: every pixel in
// its quad takes the colour of its distance from this segment unless a
// segment already stamped is nearer to it (measured from the road's
// edge, which moves as the width changes).
func (wd *world) stampSegment(i int) {
	q := wd.quad(i)
	a, b := wd.sp[i], wd.sp[i+1]
	ha, hb := wd.sh[i], wd.sh[i+1]
	ab := b.sub(a)
	l2 := ab.dot(ab)
	reach := wd.reach()
	inv := 1 / wd.ppm
	ymin, ymax := q[0].Y, q[0].Y
	for _, v := range q[1:] {
		ymin, ymax = min(ymin, v.Y), max(ymax, v.Y)
	}
	y0 := max(0, int(math.Ceil(ymin-0.5)))
	y1 := min(wd.h-1, int(math.Floor(ymax-0.5)))
	for y := y0; y <= y1; y++ {
		yc := float64(y) + 0.5
		xl, xr := math.Inf(1), math.Inf(-1)
		for e := 0; e < 4; e++ {
			p, r := q[e], q[(e+1)%4]
			if (p.Y-yc)*(r.Y-yc) > 0 || p.Y == r.Y {
				continue
			}
			x := p.X + (yc-p.Y)*(r.X-p.X)/(r.Y-p.Y)
			xl, xr = min(xl, x), max(xr, x)
		}
		if xl > xr {
			continue
		}
		x0 := max(0, int(math.Ceil(xl-0.5)))
		x1 := min(wd.w-1, int(math.Floor(xr-0.5)))
		py := wd.maxY - yc*inv - a.Y
		row := y * wd.w
		il2 := 1 / l2
		for x := x0; x <= x1; x++ {
			px := wd.minX + (float64(x)+0.5)*inv - a.X
			u := (px*ab.X + py*ab.Y) * il2
			if u < 0 {
				u = 0
			} else if u > 1 {
				u = 1
			}
			dx, dy := px-u*ab.X, py-u*ab.Y
			d := math.Sqrt(dx*dx + dy*dy)
			e := d - (ha + u*(hb-ha))
			if e >= reach {
				continue
			}
			p := row + x
			if wd.mark(p) && float32(e) >= wd.best[p] {
				continue
			}
			wd.best[p] = float32(e)
			wd.pix[p] = wd.roadColour(wd.terrainAt(x, y), e, d)
		}
	}
}

// roadColour is the colour at distance d from the centreline and e from
// the road's edge over ground colour bg: shoulder, edge band, surface and
// seam, each edge smoothed over one pixel.
func (wd *world) roadColour(bg uint32, e, d float64) uint32 {
	aa := wd.ppm // coverage per metre
	ew := wd.look.edgeWidth
	if e < -0.5/aa && d > seamHalf+0.5/aa {
		return wd.cRoad
	}
	c := bg
	c = blend(c, wd.cShoulder, (ew+shoulder-e)*aa+0.5)
	c = blend(c, wd.cEdge, (ew-e)*aa+0.5)
	c = blend(c, wd.cRoad, -e*aa+0.5)
	c = blend(c, wd.cSeam, (seamHalf-d)*aa+0.5)
	return c
}

// blend mixes over into c by coverage k (clamped to [0,1]).
func blend(c, over uint32, k float64) uint32 {
	if k <= 0 {
		return c
	}
	if k >= 1 {
		return over
	}
	a := uint32(k*256 + 0.5)
	var out uint32
	for sh := 0; sh < 24; sh += 8 {
		x, y := c>>sh&0xff, over>>sh&0xff
		out |= ((x*(256-a) + y*a) >> 8) << sh
	}
	return out | 0xff<<24
}

// stampStart draws the start band across the road at the start line.
func (wd *world) stampStart(tr *Track) {
	hw := tr.Half[0] + wd.look.edgeWidth*0.5
	wd.fillShape(shape{kind: shapeBand, c: tr.Start, size: hw, rot: tr.StartHeading}, hw+2, wd.cEdge, true)
}

// Shape kinds.
const (
	shapeDisc = iota
	shapeTriangle
	shapeRing
	shapeBand // the start band: 1.2 m along the heading rot, 2·size across
)

// shape is one filled figure of the world: a distractor or the start band.
type shape struct {
	kind      int
	c         Vec
	size, rot float64
}

// sdf is the signed distance from p to the shape in metres (negative
// inside; for the polygons the largest half-plane distance, exact along
// the edges, which is all the one-pixel smoothing needs).
func (s shape) sdf(p Vec) float64 {
	d := p.sub(s.c)
	switch s.kind {
	case shapeDisc:
		return d.norm() - s.size
	case shapeTriangle:
		m := math.Inf(-1)
		for j := 0; j < 3; j++ {
			m = math.Max(m, d.dot(unit(s.rot+2*math.Pi*float64(j)/3))-s.size/2)
		}
		return m
	case shapeRing:
		return math.Abs(d.norm()-0.72*s.size) - 0.28*s.size
	}
	t := unit(s.rot)
	n := Vec{-t.Y, t.X}
	return math.Max(math.Abs(d.dot(t))-0.6, math.Abs(d.dot(n))-s.size)
}

// fillShape draws sh within radius rad of its centre, smoothing its edge
// over one pixel. Over the road (overRoad) it blends with what is there;
// on open ground with the bare terrain.
func (wd *world) fillShape(sh shape, rad float64, col uint32, overRoad bool) {
	pc := wd.toPx(sh.c)
	r := rad * wd.ppm
	x0, x1 := max(0, int(pc.X-r)), min(wd.w-1, int(pc.X+r)+1)
	y0, y1 := max(0, int(pc.Y-r)), min(wd.h-1, int(pc.Y+r)+1)
	inv := 1 / wd.ppm
	for y := y0; y <= y1; y++ {
		for x := x0; x <= x1; x++ {
			p := Vec{wd.minX + (float64(x)+0.5)*inv, wd.maxY - (float64(y)+0.5)*inv}
			k := -sh.sdf(p)*wd.ppm + 0.5
			if k <= 0 {
				continue
			}
			i := y*wd.w + x
			had := wd.mark(i)
			if !overRoad && !had {
				wd.best[i] = float32(math.Inf(1))
			}
			wd.pix[i] = blend(wd.pix[i], col, k)
		}
	}
}

// drawShapes scatters the distractor shapes on the ground, clear of the
// road: discs, triangles and rings.
func (wd *world) drawShapes(tr *Track, seed uint64) {
	rng := seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("shapes")))
	pal := wd.look.pal.Shapes
	x0, y0 := wd.minX, wd.maxY-float64(wd.h)/wd.ppm
	wm, hm := float64(wd.w)/wd.ppm, float64(wd.h)/wd.ppm
	placed := 0
	for tries := 0; placed < wd.look.shapes && tries < wd.look.shapes*20; tries++ {
		sh := shape{size: 1.2 + 2.6*rng.Float64()}
		sh.c = Vec{x0 + wm*rng.Float64(), y0 + hm*rng.Float64()}
		sh.kind = rng.IntN(3)
		sh.rot = 2 * math.Pi * rng.Float64()
		col := pack(pal[rng.IntN(len(pal))])
		if wd.roadDistance(sh.c) < tr.Width*1.5/2+wd.reach()+1+sh.size {
			continue
		}
		placed++
		wd.fillShape(sh, sh.size+1, col, false)
	}
}

// roadDistance is the distance from p to the stamping polyline.
func (wd *world) roadDistance(p Vec) float64 {
	best := math.Inf(1)
	for i := 0; i+1 < len(wd.sp); i++ {
		a, b := wd.sp[i], wd.sp[i+1]
		ab := b.sub(a)
		u := math.Max(0, math.Min(1, p.sub(a).dot(ab)/ab.dot(ab)))
		if d := p.sub(a.add(ab.scale(u))).norm(); d < best {
			best = d
		}
	}
	return best
}

// valueNoise is lattice value noise with smoothstep interpolation on a
// 64×64 lattice that repeats.
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

// at samples the noise; with a cell dividing texSide/…, the lattice
// wraps every texSide pixels when cell·(texSide/cell mod 64) fits, so
// the tile is seamless for the cells used (32 and 8: 16 and 64 cells).
func (n *valueNoise) at(x, y float64) float64 {
	fx, fy := x/n.cell, y/n.cell
	ix, iy := math.Floor(fx), math.Floor(fy)
	tx, ty := smooth(fx-ix), smooth(fy-iy)
	per := int(texSide / n.cell)
	if per > 64 {
		per = 64
	}
	i, j := int(ix)%per, int(iy)%per
	v := func(a, b int) float64 { return n.vals[((j+b)%per)*64+((i+a)%per)] }
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

package frameio

import (
	"image"
	"image/color"
	"slices"
)

// MaxGIFColors is the most colours a GIF palette holds.
const MaxGIFColors = 256

// ColorCounts counts the colours of a sequence of frames, a frame at a
// time; its Palette is the palette a GIFWriter given the same frames
// draws them with (the writer sorts its stored pixels instead of
// counting them in a map). The zero value is an empty count. Frames are taken as opaque: alpha is ignored (an
// *image.RGBA's colour channels are used as they are, that is composited
// over black).
type ColorCounts struct {
	n map[uint32]uint64
}

func packRGB(r, g, b uint8) uint32 { return uint32(r)<<16 | uint32(g)<<8 | uint32(b) }

// Add counts the pixels of img.
func (c *ColorCounts) Add(img *image.RGBA) {
	b := img.Bounds()
	for y := b.Min.Y; y < b.Max.Y; y++ {
		i := img.PixOffset(b.Min.X, y)
		c.addRGBA(img.Pix[i : i+4*b.Dx()])
	}
}

// addRGBA counts the pixels of one row of RGBA bytes. Runs of one colour
// (the common case in rendered frames) cost one map update.
func (c *ColorCounts) addRGBA(row []byte) {
	if c.n == nil {
		c.n = make(map[uint32]uint64)
	}
	if len(row) < 4 {
		return
	}
	last, run := packRGB(row[0], row[1], row[2]), uint64(0)
	for i := 0; i+3 < len(row); i += 4 {
		k := packRGB(row[i], row[i+1], row[i+2])
		if k != last {
			c.n[last] += run
			last, run = k, 0
		}
		run++
	}
	c.n[last] += run
}

// Len is the number of distinct colours counted.
func (c *ColorCounts) Len() int { return len(c.n) }

// colorCount is one distinct colour and its pixel count.
type colorCount struct {
	rgb [3]uint8
	n   uint64
}

// sorted lists the distinct colours in increasing packed RGB order.
func (c *ColorCounts) sorted() []colorCount {
	keys := make([]uint32, 0, len(c.n))
	for k := range c.n {
		keys = append(keys, k)
	}
	slices.Sort(keys)
	out := make([]colorCount, len(keys))
	for i, k := range keys {
		out[i] = colorCount{rgb: [3]uint8{uint8(k >> 16), uint8(k >> 8), uint8(k)}, n: c.n[k]}
	}
	return out
}

// Palette returns the palette for the colours counted, at most max
// colours (0 or more than MaxGIFColors means MaxGIFColors), opaque, in
// increasing RGB order. With at most max distinct colours it is exactly
// those colours, so every pixel keeps its colour; otherwise it is built
// by median cut (Heckbert 1982): starting from the box around all the
// colours, the box with the longest side (ties: more pixels, then the
// earlier box) is cut in two across that side (see cut for where),
// until there are max boxes; each box gives the pixel-weighted mean of
// its colours, rounded. The result depends only on the counts, not on
// the order the frames were added in. An empty count gives one black.
func (c *ColorCounts) Palette(max int) color.Palette {
	if max <= 0 || max > MaxGIFColors {
		max = MaxGIFColors
	}
	return paletteOf(c.sorted(), max)
}

// paletteOf is Palette for the distinct colours cs, in increasing packed
// order; it reorders cs.
func paletteOf(cs []colorCount, max int) color.Palette {
	if len(cs) == 0 {
		return color.Palette{color.RGBA{A: 0xff}}
	}
	if len(cs) <= max {
		p := make(color.Palette, len(cs))
		for i, e := range cs {
			p[i] = color.RGBA{e.rgb[0], e.rgb[1], e.rgb[2], 0xff}
		}
		return p
	}
	boxes := []cutBox{newCutBox(cs)}
	tmp := make([]colorCount, len(cs))
	for len(boxes) < max {
		best := -1
		for i := range boxes {
			if boxes[i].side == 0 {
				continue
			}
			if best < 0 || boxes[i].side > boxes[best].side ||
				boxes[i].side == boxes[best].side && boxes[i].n > boxes[best].n {
				best = i
			}
		}
		if best < 0 {
			break // cannot happen: more colours than boxes
		}
		a, b := boxes[best].cut(tmp)
		boxes[best] = a
		boxes = append(boxes, b)
	}
	keys := make([]uint32, len(boxes))
	for i, bx := range boxes {
		keys[i] = bx.mean()
	}
	slices.Sort(keys)
	keys = slices.Compact(keys) // boxes are disjoint, means may still meet
	p := make(color.Palette, len(keys))
	for i, k := range keys {
		p[i] = color.RGBA{uint8(k >> 16), uint8(k >> 8), uint8(k), 0xff}
	}
	return p
}

// cutBox is a run of distinct colours with its bounds: the colours lie
// in cs, side is the longest extent and axis the channel it lies on.
type cutBox struct {
	cs     []colorCount
	n      uint64
	side   int
	axis   int
	lo, hi [3]uint8
}

func newCutBox(cs []colorCount) cutBox {
	b := cutBox{cs: cs, lo: cs[0].rgb, hi: cs[0].rgb}
	for _, e := range cs {
		b.n += e.n
		for k := range 3 {
			b.lo[k] = min(b.lo[k], e.rgb[k])
			b.hi[k] = max(b.hi[k], e.rgb[k])
		}
	}
	for k := range 3 {
		if s := int(b.hi[k]) - int(b.lo[k]); s > b.side {
			b.side, b.axis = s, k
		}
	}
	return b
}

// cut splits b across its longest side, between two values of that
// channel, where the two halves leave the least pixel-weighted squared
// error along it (the variance-based cut of Wan, Wong & Prusinkiewicz
// 1988, from memory). Unlike a cut at the median pixel, it keeps a
// small object of its own colour apart from a large area of another.
//
// The colours are ordered by that channel with a counting sort (stable,
// through tmp, which holds at least len(b.cs)), and the errors come from
// exact integer sums, so the cut depends on the counts alone.
func (b cutBox) cut(tmp []colorCount) (cutBox, cutBox) {
	k := b.axis
	var cnt [256]int
	var wn [256]uint64
	for _, e := range b.cs {
		cnt[e.rgb[k]]++
		wn[e.rgb[k]] += e.n
	}
	// Sums along the axis; the error of a half is Σnv² − (Σnv)²/Σn.
	var tn, tv, tq uint64
	for v := int(b.lo[k]); v <= int(b.hi[k]); v++ {
		w := wn[v]
		tn, tv, tq = tn+w, tv+w*uint64(v), tq+w*uint64(v*v)
	}
	var ln, lv, lq uint64
	cutAt, bestErr := -1, 0.0
	for v := int(b.lo[k]); v < int(b.hi[k]); v++ {
		w := wn[v]
		if w == 0 {
			continue
		}
		ln, lv, lq = ln+w, lv+w*uint64(v), lq+w*uint64(v*v)
		rn, rv, rq := tn-ln, tv-lv, tq-lq
		err := float64(lq) - float64(lv)*float64(lv)/float64(ln) + float64(rq) - float64(rv)*float64(rv)/float64(rn)
		if cutAt < 0 || err < bestErr {
			cutAt, bestErr = v, err
		}
	}
	// Counting sort by the channel, then the halves: values ≤ cutAt first.
	var start [256]int
	for v, pos := 0, 0; v < 256; v++ {
		start[v], pos = pos, pos+cnt[v]
	}
	tmp = tmp[:len(b.cs)]
	for _, e := range b.cs {
		tmp[start[e.rgb[k]]] = e
		start[e.rgb[k]]++
	}
	copy(b.cs, tmp)
	j := start[cutAt]
	return newCutBox(b.cs[:j:j]), newCutBox(b.cs[j:])
}

// mean is the pixel-weighted mean colour of b, rounded, packed.
func (b cutBox) mean() uint32 {
	var s [3]uint64
	for _, e := range b.cs {
		for k := range 3 {
			s[k] += uint64(e.rgb[k]) * e.n
		}
	}
	var m [3]uint8
	for k := range 3 {
		m[k] = uint8((2*s[k] + b.n) / (2 * b.n))
	}
	return packRGB(m[0], m[1], m[2])
}

// colorMapper maps colours to the index of their nearest palette colour
// (least squared RGB distance, the lower index on ties, as
// color.Palette.Index does for opaque colours), remembering every answer.
type colorMapper struct {
	pal   [][3]int32 // palette colours, sorted by red
	order []uint8    // pal[i] is palette index order[i]
	memo  map[uint32]uint8
}

func newColorMapper(p color.Palette) *colorMapper {
	m := &colorMapper{memo: make(map[uint32]uint8)}
	idx := make([]int, len(p))
	for i := range idx {
		idx[i] = i
	}
	rgb := make([][3]int32, len(p))
	for i, c := range p {
		r, g, b, _ := c.RGBA()
		rgb[i] = [3]int32{int32(r >> 8), int32(g >> 8), int32(b >> 8)}
	}
	slices.SortStableFunc(idx, func(a, b int) int { return int(rgb[a][0] - rgb[b][0]) })
	for _, i := range idx {
		m.pal = append(m.pal, rgb[i])
		m.order = append(m.order, uint8(i))
	}
	return m
}

// index is the palette index for the packed colour k.
func (m *colorMapper) index(k uint32) uint8 {
	if i, ok := m.memo[k]; ok {
		return i
	}
	i := m.search(int32(k>>16), int32(k>>8&0xff), int32(k&0xff))
	m.memo[k] = i
	return i
}

// search scans outward from the palette colours of nearest red, stopping
// on each side once the red difference alone exceeds the best distance.
func (m *colorMapper) search(r, g, b int32) uint8 {
	start, _ := slices.BinarySearchFunc(m.pal, r, func(e [3]int32, t int32) int { return int(e[0] - t) })
	best, bestD := -1, int32(1<<30)
	consider := func(j int) {
		e := m.pal[j]
		dr, dg, db := e[0]-r, e[1]-g, e[2]-b
		d := dr*dr + dg*dg + db*db
		if d < bestD || d == bestD && m.order[j] < m.order[best] {
			best, bestD = j, d
		}
	}
	for j := start; j < len(m.pal); j++ {
		if dr := m.pal[j][0] - r; dr*dr > bestD {
			break
		}
		consider(j)
	}
	for j := start - 1; j >= 0; j-- {
		if dr := r - m.pal[j][0]; dr*dr > bestD {
			break
		}
		consider(j)
	}
	return m.order[best]
}

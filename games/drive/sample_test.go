package drive

import (
	"bytes"
	"image"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/internal/seeds"
)

// refSample is the plain sampler the fast ones must match byte for byte:
// each frame pixel's 16.16 position computed afresh from the frame's
// origin and steps, floored by the arithmetic shift, and looked up, the
// border colour outside the image (nearest-neighbour sampling as common
// practice defines it).
func refSample(pix []uint32, ww, wh int, border uint32, out []byte, outStride, W, H int, st sampling) {
	for row := 0; row < H; row++ {
		for col := 0; col < W; col++ {
			u := int64(st.u) + int64(col)*int64(st.duc) + int64(row)*int64(st.dur)
			v := int64(st.v) + int64(col)*int64(st.dvc) + int64(row)*int64(st.dvr)
			x, y := u>>16, v>>16
			px := border
			if x >= 0 && y >= 0 && x < int64(ww) && y < int64(wh) {
				px = pix[y*int64(ww)+x]
			}
			o := row*outStride + 4*col
			out[o], out[o+1], out[o+2], out[o+3] = uint8(px), uint8(px>>8), uint8(px>>16), uint8(px>>24)
		}
	}
}

// samplerPath is one of the sampler's code paths: the AVX-512 or AVX2
// gathers or plain Go.
type samplerPath struct {
	name           string
	gather, gath16 bool
}

// samplerPaths lists the paths this machine and build can run, and
// restores the switches when the test ends.
func samplerPaths(t *testing.T) []samplerPath {
	g, g16 := haveGather, haveGather512
	t.Cleanup(func() { haveGather, haveGather512 = g, g16 })
	ps := []samplerPath{{name: "go"}}
	if g {
		ps = append(ps, samplerPath{name: "avx2", gather: true})
	}
	if g16 {
		ps = append(ps, samplerPath{name: "avx512", gather: true, gath16: true})
	}
	return ps
}

func (p samplerPath) use() { haveGather, haveGather512 = p.gather, p.gath16 }

// Every sampler path gives the reference's bytes on random views of a
// random world image: any angle and scale, frame sizes that are and are
// not multiples of the gathers' 8 and 16 columns, padded rows (left
// untouched), and views wholly inside the image (the fast path), partly
// outside (the clipped path) and wholly outside.
func TestSamplerMatchesReference(t *testing.T) {
	paths := samplerPaths(t)
	rng := seeds.NewRand(21)
	var inside, clipped int
	var wd *world
	for n := 0; n < 2000; n++ {
		if n%25 == 0 { // a new world image every 25 views
			ww, wh := 200+rng.IntN(500), 200+rng.IntN(500)
			wd = &world{w: ww, h: wh, border: rng.Uint32(), pix: make([]uint32, ww*wh)}
			for i := range wd.pix {
				wd.pix[i] = rng.Uint32()
			}
		}
		ww, wh := wd.w, wd.h
		W, H := 1+rng.IntN(256), 1+rng.IntN(128)
		pad := 4 * rng.IntN(3)
		stride := 4*W + pad
		ang := 2 * math.Pi * rng.Float64()
		k := 1.0 // the game's scale
		if n%3 != 0 {
			k = 0.3 + 1.2*rng.Float64()
		}
		cs, sn := math.Cos(ang)*k, math.Sin(ang)*k
		// The view's centre anywhere from a little outside the image to
		// its middle: most views inside, many straddling an edge, some
		// wholly outside.
		cu := (1.4*rng.Float64() - 0.2) * float64(ww)
		cv := (1.4*rng.Float64() - 0.2) * float64(wh)
		u0 := cu - float64(W)/2*sn + float64(H)/2*cs
		v0 := cv - float64(W)/2*cs - float64(H)/2*sn
		st := sampling{
			u: fix16(u0), v: fix16(v0),
			duc: fix16(sn), dvc: fix16(cs), dur: fix16(-cs), dvr: fix16(sn),
		}
		w1, h1 := int32(W-1), int32(H-1)
		if wd.inside(st.u, st.v) && wd.inside(st.u+w1*st.duc, st.v+w1*st.dvc) &&
			wd.inside(st.u+h1*st.dur, st.v+h1*st.dvr) && wd.inside(st.u+w1*st.duc+h1*st.dur, st.v+w1*st.dvc+h1*st.dvr) {
			inside++
		} else {
			clipped++
		}
		want := bytes.Repeat([]byte{0xa5}, (H-1)*stride+4*W)
		refSample(wd.pix, ww, wh, wd.border, want, stride, W, H, st)
		for _, p := range paths {
			p.use()
			got := bytes.Repeat([]byte{0xa5}, len(want))
			wd.sample(got, stride, W, H, st)
			if !bytes.Equal(got, want) {
				i := 0
				for got[i] == want[i] {
					i++
				}
				t.Fatalf("%s: view %d (world %dx%d, frame %dx%d, stride %d, %+v): first difference at byte %d (row %d, column %d)",
					p.name, n, ww, wh, W, H, stride, st, i, i/stride, i%stride/4)
			}
		}
	}
	t.Logf("%d views inside the image, %d clipped", inside, clipped)
	if inside < 400 || clipped < 400 {
		t.Fatalf("%d views inside and %d clipped: want both paths well covered", inside, clipped)
	}
}

// Every sampler path renders the same frames through whole expert
// episodes, at the default size and at widths that leave columns to the
// portable tail.
func TestRenderSamplerPathsAgree(t *testing.T) {
	paths := samplerPaths(t)
	if len(paths) < 2 {
		t.Skip("only the portable sampler on this machine or build")
	}
	for _, size := range [][2]int{{DefaultWidth, DefaultHeight}, {100, 70}, {23, 16}} {
		cfg := DefaultConfig()
		cfg.Width, cfg.Height = size[0], size[1]
		g, err := NewConfig(cfg, "")
		if err != nil {
			t.Fatal(err)
		}
		g.Reset(games.HeldOut(3))
		act := make([]float64, 2)
		frames := make([]*image.RGBA, len(paths))
		for i := range frames {
			frames[i] = image.NewRGBA(image.Rect(0, 0, size[0], size[1]))
		}
		for step := 0; step < 400; step++ {
			for i, p := range paths {
				p.use()
				g.Render(frames[i])
			}
			for i := 1; i < len(paths); i++ {
				if !bytes.Equal(frames[i].Pix, frames[0].Pix) {
					t.Fatalf("%dx%d step %d: %s and %s frames differ", size[0], size[1], step, paths[i].name, paths[0].name)
				}
			}
			g.Expert().Act(act)
			if st, _ := g.Step(act); st.Done {
				break
			}
		}
	}
}

// drawSprite's two-lane blend gives the plain per-channel blend
// (frame·(256−a) + car·a) >> 8 for every coverage 0..256 over random
// frames and colours, and leaves alpha and the other pixels alone.
func TestSpriteBlendMatchesPlain(t *testing.T) {
	g := newGame(t, "")
	W, H := g.cfg.Width, g.cfg.Height
	rng := seeds.NewRand(23)
	dst := image.NewRGBA(image.Rect(0, 0, W, H))
	want := make([]byte, len(dst.Pix))
	for round := 0; round < 200; round++ {
		g.sprite = g.sprite[:0]
		used := map[int]bool{}
		for a := uint32(0); a <= 256; a++ {
			row, col := rng.IntN(H), rng.IntN(W)
			if used[row*W+col] {
				continue
			}
			used[row*W+col] = true
			c := rng.Uint32()
			g.sprite = append(g.sprite, spritePx{
				off: row*4*W + 4*col, c: c, alpha: a, row: int32(row), col: int32(col),
				rb: (c & 0xff00ff) * a, g: (c & 0xff00) * a, keep: 256 - a,
			})
		}
		for i := range dst.Pix {
			dst.Pix[i] = uint8(rng.Uint32())
		}
		copy(want, dst.Pix)
		for _, s := range g.sprite {
			for ch := 0; ch < 3; ch++ {
				x, y := uint32(want[s.off+ch]), s.c>>(8*ch)&0xff
				want[s.off+ch] = uint8((x*(256-s.alpha) + y*s.alpha) >> 8)
			}
		}
		g.drawSprite(dst)
		if !bytes.Equal(dst.Pix, want) {
			t.Fatalf("round %d: the sprite blend differs from the plain one", round)
		}
	}
}

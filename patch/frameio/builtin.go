package frameio

import (
	"fmt"
	"image"
	"io"
	"sort"
	"strings"
)

// Built-in scenes: small synthetic sequences of our own, drawn with
// integer arithmetic only, so that the same call gives the same bytes on
// every machine.
//
//	drift    four shapes (a disc, a ring, a square and a bar) gliding on
//	         their own paths over a dusk-coloured vertical gradient
//	checker  a diagonally scrolling checkerboard of a few colours
//	         (a GIF keeps them exactly: handy for exact round trips)
var scenes = map[string]func(t, w, h int, pix []byte){
	"drift":   drawDrift,
	"checker": drawChecker,
}

// builtinNames lists the built-in scenes.
func builtinNames() []string {
	var n []string
	for k := range scenes {
		n = append(n, k)
	}
	sort.Strings(n)
	return n
}

// Builtin returns a reader of frames frames of the named scene at
// width×height.
func Builtin(name string, frames, width, height int) (Reader, error) {
	draw, ok := scenes[name]
	if !ok {
		return nil, fmt.Errorf("built-in scene %q: want one of %s", name, strings.Join(builtinNames(), ", "))
	}
	if frames <= 0 || frames > MaxFrames {
		return nil, fmt.Errorf("built-in scene %s: %d frames, want 1..%d", name, frames, MaxFrames)
	}
	if err := checkSize(width, height); err != nil {
		return nil, fmt.Errorf("built-in scene %s: %w", name, err)
	}
	return &builtinReader{
		info: Info{Name: "builtin:" + name, Width: width, Height: height, Channels: 3, Frames: frames},
		draw: draw,
	}, nil
}

// builtinFrame draws frame t of the named scene into dst (its bounds give
// the size).
func builtinFrame(name string, t int, dst *image.RGBA) error {
	draw, ok := scenes[name]
	if !ok {
		return fmt.Errorf("built-in scene %q: want one of %s", name, strings.Join(builtinNames(), ", "))
	}
	b := dst.Bounds()
	if b.Min != (image.Point{}) || dst.Stride != 4*b.Dx() {
		c := image.NewRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
		draw(t, b.Dx(), b.Dy(), c.Pix)
		for y := 0; y < b.Dy(); y++ {
			copy(dst.Pix[dst.PixOffset(b.Min.X, b.Min.Y+y):], c.Pix[y*c.Stride:(y+1)*c.Stride])
		}
		return nil
	}
	draw(t, b.Dx(), b.Dy(), dst.Pix)
	return nil
}

type builtinReader struct {
	info  Info
	draw  func(t, w, h int, pix []byte)
	t     int
	frame *image.RGBA
}

func (b *builtinReader) Info() Info { return b.info }

func (b *builtinReader) Next() (*image.RGBA, error) {
	if b.t >= b.info.Frames {
		return nil, io.EOF
	}
	if b.frame == nil {
		b.frame = image.NewRGBA(image.Rect(0, 0, b.info.Width, b.info.Height))
	}
	b.draw(b.t, b.info.Width, b.info.Height, b.frame.Pix)
	b.t++
	return b.frame, nil
}

func (b *builtinReader) Close() error { return nil }

// tri is a triangle wave: it goes from lo to hi and back in 2·period
// steps, in whole numbers.
func tri(t, period, lo, hi int) int {
	k := t % (2 * period)
	if k > period {
		k = 2*period - k
	}
	return lo + (hi-lo)*k/period
}

func set(pix []byte, w, x, y int, c [3]byte) {
	o := 4 * (y*w + x)
	pix[o], pix[o+1], pix[o+2], pix[o+3] = c[0], c[1], c[2], 0xff
}

func drawDrift(t, w, h int, pix []byte) {
	// Background: a vertical gradient from slate blue to a muted olive.
	top, bot := [3]int{38, 52, 84}, [3]int{104, 112, 70}
	for y := 0; y < h; y++ {
		var c [3]byte
		for i := range c {
			c[i] = byte(top[i] + (bot[i]-top[i])*y/max(h-1, 1))
		}
		for x := 0; x < w; x++ {
			set(pix, w, x, y, c)
		}
	}
	m := min(w, h)
	// A bar (amber) sweeping left and right, full height.
	bw := max(1, m/24)
	bx := tri(t, 53, 0, w-bw)
	for y := 0; y < h; y++ {
		for x := bx; x < bx+bw; x++ {
			set(pix, w, x, y, [3]byte{236, 196, 72})
		}
	}
	// A square (pale aqua) crossing left to right, wrapping around.
	s := max(2, m/6)
	sx := (t*max(1, w/40) + w/5) % (w + s)
	sy := tri(t, 31, h/2, h-s-1)
	for y := sy; y < sy+s && y < h; y++ {
		for x := sx - s; x < sx && x < w; x++ {
			if x >= 0 && y >= 0 {
				set(pix, w, x, y, [3]byte{150, 222, 214})
			}
		}
	}
	// A disc (coral) on a slow figure of two triangle waves.
	r := max(2, m/8)
	cx, cy := tri(t, 47, r, w-r-1), tri(t+11, 29, r, h-r-1)
	// A ring (violet) bouncing on the other diagonal.
	rr := max(3, m/7)
	rx, ry := tri(t+20, 37, rr, w-rr-1), tri(t, 43, h-rr-1, rr)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			if dx, dy := x-cx, y-cy; dx*dx+dy*dy <= r*r {
				set(pix, w, x, y, [3]byte{232, 108, 84})
			}
			d := (x-rx)*(x-rx) + (y-ry)*(y-ry)
			if in := rr - max(1, rr/3); d <= rr*rr && d > in*in {
				set(pix, w, x, y, [3]byte{150, 96, 200})
			}
		}
	}
}

func drawChecker(t, w, h int, pix []byte) {
	cell := max(2, min(w, h)/12)
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			cx, cy := (x+t)/cell, (y+t/2)/cell
			k := (cx*7 + cy*13 + (cx+cy)%2*101) % 216
			set(pix, w, x, y, [3]byte{byte(k / 36 * 51), byte(k / 6 % 6 * 51), byte(k % 6 * 51)})
		}
	}
}

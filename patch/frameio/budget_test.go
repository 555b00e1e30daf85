package frameio

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/color"
	"image/gif"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// craftedPNG is a tiny, valid-looking 8-bit grey PNG whose header claims
// w×h pixels; its image data is a few bytes of zlib, so decoding it would
// allocate the whole w×h image before failing on the short data (the
// layout of signature, IHDR, IDAT, IEND is the PNG specification's).
func craftedPNG(w, h uint32) []byte {
	var b bytes.Buffer
	b.WriteString("\x89PNG\r\n\x1a\n")
	chunk := func(typ string, data []byte) {
		binary.Write(&b, binary.BigEndian, uint32(len(data)))
		c := crc32.NewIEEE()
		c.Write([]byte(typ))
		c.Write(data)
		b.WriteString(typ)
		b.Write(data)
		binary.Write(&b, binary.BigEndian, c.Sum32())
	}
	ihdr := make([]byte, 13)
	binary.BigEndian.PutUint32(ihdr[0:], w)
	binary.BigEndian.PutUint32(ihdr[4:], h)
	ihdr[8] = 8 // bit depth; colour type 0 (grey), no interlace
	chunk("IHDR", ihdr)
	var z bytes.Buffer
	zw := zlib.NewWriter(&z)
	zw.Write([]byte{0, 0, 0, 0})
	zw.Close()
	chunk("IDAT", z.Bytes())
	chunk("IEND", nil)
	return b.Bytes()
}

// allocated runs f and returns the bytes it allocated on the heap.
func allocated(f func()) uint64 {
	var a, b runtime.MemStats
	runtime.GC()
	runtime.ReadMemStats(&a)
	f()
	runtime.ReadMemStats(&b)
	return b.TotalAlloc - a.TotalAlloc
}

// A crafted PNG as the second (or a later) frame of a folder is refused
// from its header: it names the size and allocates no pixels for it. This
// used to end the process with "out of memory" (100000×100000) or cost
// 1.6 GB (20000×20000), because only the first frame's header was read.
func TestBudgetLaterFrames(t *testing.T) {
	crafted := craftedPNG(100000, 100000)
	if len(crafted) > 80 {
		t.Fatalf("crafted PNG is %d bytes", len(crafted))
	}
	for _, c := range []struct {
		w, h uint32
		name string
	}{{100000, 100000, "frame-b.png"}, {20000, 20000, "frame-b.png"}, {20000, 20000, "frame-c.png"}, {16, 12, "frame-c.png"}} {
		dir := t.TempDir()
		writePNG(t, filepath.Join(dir, "frame-a.png"), solid(12, 9, color.RGBA{1, 2, 3, 255}))
		if c.name == "frame-c.png" {
			writePNG(t, filepath.Join(dir, "frame-b.png"), solid(12, 9, color.RGBA{1, 2, 3, 255}))
		}
		os.WriteFile(filepath.Join(dir, c.name), craftedPNG(c.w, c.h), 0o644)
		r, err := Open(dir, Options{})
		if err != nil {
			t.Fatal(err)
		}
		var last error
		n := allocated(func() {
			for {
				if _, err := r.Next(); err != nil {
					last = err
					return
				}
			}
		})
		want := itoa(c.w) + "x" + itoa(c.h)
		if last == io.EOF || last == nil || !strings.Contains(last.Error(), want) || !strings.Contains(last.Error(), c.name) {
			t.Fatalf("%dx%d as %s: %v, want an error naming %s and the file", c.w, c.h, c.name, last, want)
		}
		if n > 8<<20 {
			t.Errorf("%dx%d as %s: %d bytes allocated before the refusal", c.w, c.h, c.name, n)
		}
	}
}

func itoa(v uint32) string {
	var b []byte
	for {
		b = append([]byte{byte('0' + v%10)}, b...)
		v /= 10
		if v == 0 {
			return string(b)
		}
	}
}

// Options.MaxPixels is the one budget for every reader: lowered, it
// refuses frames of a folder, a single file, a .npy and a GIF over it,
// naming the budget; at the frame's exact area it accepts them.
func TestBudgetOption(t *testing.T) {
	dir := t.TempDir()
	frames := filepath.Join(dir, "frames")
	os.Mkdir(frames, 0o755)
	writePNG(t, filepath.Join(frames, "a.png"), solid(12, 9, color.RGBA{1, 2, 3, 255}))
	npy := filepath.Join(dir, "a.npy")
	var b bytes.Buffer
	b.Write(NPYHeader([]int{2, 9, 12, 3}))
	b.Write(make([]byte, 2*9*12*3))
	os.WriteFile(npy, b.Bytes(), 0o644)
	gf := filepath.Join(dir, "a.gif")
	w := &GIFWriter{}
	w.Add(solid(12, 9, color.RGBA{A: 255}))
	var g bytes.Buffer
	w.Encode(&g)
	os.WriteFile(gf, g.Bytes(), 0o644)
	raw := filepath.Join(dir, "a.rgb")
	os.WriteFile(raw, make([]byte, 12*9*3), 0o644)
	for _, in := range []string{frames, filepath.Join(frames, "a.png"), npy, gf, raw} {
		if _, err := Open(in, Options{MaxPixels: 107, Width: 12, Height: 9}); err == nil || !strings.Contains(err.Error(), "pixel budget of 107") {
			t.Errorf("%s under a 107-pixel budget: %v", in, err)
		}
		r, err := Open(in, Options{MaxPixels: 108, Width: 12, Height: 9})
		if err != nil {
			t.Errorf("%s under a 108-pixel budget: %v", in, err)
			continue
		}
		if _, err := ReadAll(r); err != nil {
			t.Errorf("%s: %v", in, err)
		}
	}
}

// manyFrameGIF is a GIF of n frames of w×h, each a few bytes.
func manyFrameGIF(n, w, h int) []byte {
	pal := color.Palette{color.RGBA{0, 0, 0, 255}, color.RGBA{255, 255, 255, 255}}
	g := &gif.GIF{Config: image.Config{ColorModel: pal, Width: w, Height: h}}
	for range n {
		g.Image = append(g.Image, image.NewPaletted(image.Rect(0, 0, w, h), pal))
		g.Delay = append(g.Delay, 1)
	}
	var b bytes.Buffer
	gif.EncodeAll(&b, g)
	return b.Bytes()
}

// A GIF is decoded whole, so its frames together may hold at most four
// times the budget; the count comes from a walk over the blocks, before
// image/gif decodes anything.
func TestBudgetGIFTotal(t *testing.T) {
	data := manyFrameGIF(50, 10, 10) // 5000 pixels in all
	if _, err := readGIF("a.gif", bytes.NewReader(data), 1249); err == nil || !strings.Contains(err.Error(), "50 frames hold 5000 pixels") {
		t.Fatalf("5000 pixels under a budget of 1249: %v", err)
	}
	if _, err := readGIF("a.gif", bytes.NewReader(data), 1250); err != nil {
		t.Fatalf("5000 pixels under a budget of 1250: %v", err)
	}
	if s := scanGIF(bytes.NewReader(data)); s.frames != 50 || s.pixels != 5000 {
		t.Fatalf("scan %+v, want 50 frames of 5000 pixels", s)
	}
}

// FuzzDecodeFrame feeds arbitrary bytes to the reader of a folder's
// frames (header first, pixels only at the wanted size): no panic, and a
// decoded frame has the wanted size. Seeds include headers that claim
// huge sizes.
func FuzzDecodeFrame(f *testing.F) {
	var b bytes.Buffer
	png.Encode(&b, solid(12, 9, color.RGBA{9, 8, 7, 255}))
	f.Add(b.Bytes())
	f.Add(craftedPNG(100000, 100000))
	f.Add(craftedPNG(20000, 20000))
	f.Add(craftedPNG(12, 9))
	f.Add(craftedPNG(0, 9))
	f.Fuzz(func(t *testing.T, data []byte) {
		img, err := decodeSized(bytes.NewReader(data), 12, 9)
		if err != nil {
			return
		}
		if b := img.Bounds(); b.Dx() != 12 || b.Dy() != 9 {
			t.Fatalf("decoded %v, want 12x9", b)
		}
	})
}

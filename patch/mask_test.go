package patch

import (
	"bytes"
	"compress/zlib"
	"encoding/binary"
	"hash/crc32"
	"image"
	"image/png"
	"os"
	"path/filepath"
	"runtime"
	"strings"
	"testing"
)

// craftedPNG is a tiny grey PNG whose header claims w×h pixels over a few
// bytes of image data (chunk layout per the PNG specification).
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
	ihdr[8] = 8
	chunk("IHDR", ihdr)
	var z bytes.Buffer
	zw := zlib.NewWriter(&z)
	zw.Write([]byte{0, 0, 0, 0})
	zw.Close()
	chunk("IDAT", z.Bytes())
	chunk("IEND", nil)
	return b.Bytes()
}

// A mask whose header claims a huge size is refused from the header,
// naming both sizes, with next to nothing allocated. It used to be
// decoded whole first: "out of memory" at 100000×100000, 1.6 GB at
// 20000×20000.
func TestMaskCraftedHeader(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 8, Height: 4, PatchW: 2})
	dir := t.TempDir()
	for _, side := range []uint32{100000, 20000} {
		path := filepath.Join(dir, "m.png")
		os.WriteFile(path, craftedPNG(side, side), 0o644)
		var a, b runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&a)
		_, err := NewPipeline(g, Spec{Occlude: "mask:" + path})
		runtime.ReadMemStats(&b)
		if err == nil || !strings.Contains(err.Error(), "mask is") || !strings.Contains(err.Error(), "frames are 8x4") {
			t.Fatalf("%d² mask: %v", side, err)
		}
		if n := b.TotalAlloc - a.TotalAlloc; n > 4<<20 {
			t.Errorf("%d² mask: %d bytes allocated before the refusal", side, n)
		}
	}
}

// FuzzReadMask feeds arbitrary bytes as a mask file: no panic; what is
// accepted yields one flag per cell. Seeds include crafted huge headers.
func FuzzReadMask(f *testing.F) {
	var b bytes.Buffer
	png.Encode(&b, image.NewGray(image.Rect(0, 0, 8, 4)))
	f.Add(b.Bytes())
	f.Add(craftedPNG(100000, 100000))
	f.Add(craftedPNG(20000, 20000))
	f.Add(craftedPNG(8, 4))
	g, err := NewGrid(GridConfig{Width: 8, Height: 4, PatchW: 2})
	if err != nil {
		f.Fatal(err)
	}
	path := filepath.Join(f.TempDir(), "m.png")
	f.Fuzz(func(t *testing.T, data []byte) {
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		cells, err := readMaskFile(g, path)
		if err == nil && len(cells) != g.N() {
			t.Fatalf("%d cells, grid has %d", len(cells), g.N())
		}
	})
}

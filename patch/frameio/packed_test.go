package frameio

import (
	"bytes"
	"image"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestBytesAt: frames read as stored, several at once, are the RGB (or
// grey) bytes of the frames ReadFrameAt gives, for .npy in three and one
// channels and for raw RGB24; reads past the end or of part of a frame
// are refused.
func TestBytesAt(t *testing.T) {
	dir := t.TempDir()
	src, err := Builtin("drift", 9, 20, 14)
	if err != nil {
		t.Fatal(err)
	}
	frames, err := ReadAll(src)
	if err != nil {
		t.Fatal(err)
	}
	var raw []byte
	for _, f := range frames {
		for i := 0; i < len(f.Pix); i += 4 {
			raw = append(raw, f.Pix[i], f.Pix[i+1], f.Pix[i+2])
		}
	}
	rawPath := filepath.Join(dir, "f.rgb")
	if err := os.WriteFile(rawPath, raw, 0o644); err != nil {
		t.Fatal(err)
	}
	paths := map[string]int{rawPath: 3}
	for _, ch := range []int{3, 1} {
		path := filepath.Join(dir, []string{"", "grey", "", "rgb"}[ch]+".npy")
		f, _ := os.Create(path)
		w, _ := NewNPYWriter(f, 20, 14, ch, len(frames))
		for _, fr := range frames {
			w.WriteFrame(fr)
		}
		w.Close()
		f.Close()
		paths[path] = ch
	}
	for path, ch := range paths {
		r, err := OpenRandom(path, Options{Width: 20, Height: 14})
		if err != nil {
			t.Fatal(err)
		}
		pk, ok := r.(Packed)
		if !ok {
			t.Fatalf("%s: not Packed", path)
		}
		if pk.Info().Channels != ch {
			t.Fatalf("%s: %d channels, want %d", path, pk.Info().Channels, ch)
		}
		fb := 20 * 14 * ch
		dst := image.NewRGBA(image.Rect(0, 0, 20, 14))
		for _, span := range [][2]int{{0, 1}, {3, 4}, {0, len(frames)}, {len(frames) - 1, 1}} {
			buf := make([]byte, span[1]*fb)
			if err := pk.BytesAt(span[0], buf); err != nil {
				t.Fatal(err)
			}
			for k := 0; k < span[1]; k++ {
				if err := r.ReadFrameAt(span[0]+k, dst); err != nil {
					t.Fatal(err)
				}
				var want []byte
				for i := 0; i < len(dst.Pix); i += 4 {
					want = append(want, dst.Pix[i:i+ch]...)
				}
				if !bytes.Equal(buf[k*fb:(k+1)*fb], want) {
					t.Errorf("%s: frame %d of frames %d..%d differs from ReadFrameAt", path, span[0]+k, span[0], span[0]+span[1]-1)
				}
			}
		}
		for _, c := range []struct {
			i, n int
			want string
		}{{len(frames) - 1, 2 * fb, "frames 8..9"}, {-1, fb, "frames -1..-1"}, {0, fb + 1, "buffer of"}, {0, 0, "buffer of"}} {
			if err := pk.BytesAt(c.i, make([]byte, c.n)); err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("%s: BytesAt(%d, %d bytes): %v, want an error with %q", path, c.i, c.n, err, c.want)
			}
		}
		// Stored names where the frames are: the same bytes read there.
		f, off, err := pk.Stored(2, 3)
		if err != nil {
			t.Fatal(err)
		}
		at, want := make([]byte, 3*fb), make([]byte, 3*fb)
		if _, err := f.ReadAt(at, off); err != nil {
			t.Fatal(err)
		}
		if err := pk.BytesAt(2, want); err != nil || !bytes.Equal(at, want) {
			t.Errorf("%s: the bytes at Stored(2, 3) are not frames 2..4 (%v)", path, err)
		}
		if _, _, err := pk.Stored(len(frames)-2, 3); err == nil {
			t.Errorf("%s: Stored past the end: no error", path)
		}
		r.Close()
	}
}

// BenchmarkBytesAt96 reads 64 frames of 96×96×3 as stored with one read,
// against BenchmarkReadFrameAt96, which reads them one by one into RGBA
// frames, in the same run.
func BenchmarkBytesAt96(b *testing.B)     { benchRandom96(b, true) }
func BenchmarkReadFrameAt96(b *testing.B) { benchRandom96(b, false) }

func benchRandom96(b *testing.B, packed bool) {
	const n = 64
	path := filepath.Join(b.TempDir(), "f.npy")
	if err := os.WriteFile(path, encodeNPY(b, patternFrames(n, 96, 96, 3), 3), 0o644); err != nil {
		b.Fatal(err)
	}
	r, err := OpenRandom(path, Options{})
	if err != nil {
		b.Fatal(err)
	}
	defer r.Close()
	buf := make([]byte, n*96*96*3)
	dst := image.NewRGBA(image.Rect(0, 0, 96, 96))
	b.SetBytes(n * 96 * 96 * 3)
	b.ReportAllocs()
	for b.Loop() {
		if packed {
			if err := r.(Packed).BytesAt(0, buf); err != nil {
				b.Fatal(err)
			}
			continue
		}
		for i := 0; i < n; i++ {
			if err := r.ReadFrameAt(i, dst); err != nil {
				b.Fatal(err)
			}
		}
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N)/n, "ns/frame")
}

package frameio

import (
	"bytes"
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"image"
	"io"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
)

// patternFrames builds the frames of testdata/ref/npy_ref.py's pattern,
// value = (31 t + 7 y + 3 x + 11 c) mod 256, as RGBA (grey repeats the
// channel-0 value).
func patternFrames(t, h, w, c int) []*image.RGBA {
	out := make([]*image.RGBA, t)
	for k := range out {
		img := image.NewRGBA(image.Rect(0, 0, w, h))
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				o := img.PixOffset(x, y)
				for ch := 0; ch < 3; ch++ {
					cc := ch
					if c == 1 {
						cc = 0
					}
					img.Pix[o+ch] = byte((31*k + 7*y + 3*x + 11*cc) % 256)
				}
				img.Pix[o+3] = 0xff
			}
		}
		out[k] = img
	}
	return out
}

func encodeNPY(t testing.TB, frames []*image.RGBA, c int) []byte {
	t.Helper()
	var buf bytes.Buffer
	b := frames[0].Bounds()
	w, err := NewNPYWriter(&buf, b.Dx(), b.Dy(), c, len(frames))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range frames {
		if err := w.WriteFrame(f); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestNPYHeaderNEP1 checks the preamble against NEP 1 ("A Simple File
// Format for NumPy Arrays"): magic "\x93NUMPY", version bytes 1 0, a
// little-endian uint16 header length, an ASCII dict literal terminated by
// "\n" and padded with spaces so the whole preamble is a multiple of 64
// bytes (numpy/lib/format.py, ARRAY_ALIGN = 64).
func TestNPYHeaderNEP1(t *testing.T) {
	for _, dims := range [][]int{{1, 1, 1, 1}, {2, 5, 7, 3}, {12345, 96, 96, 3}, {7, 3, 5}} {
		h := NPYHeader(dims)
		if string(h[:6]) != "\x93NUMPY" || h[6] != 1 || h[7] != 0 {
			t.Fatalf("%v: preamble %q", dims, h[:8])
		}
		hlen := int(binary.LittleEndian.Uint16(h[8:10]))
		if 10+hlen != len(h) || len(h)%64 != 0 || h[len(h)-1] != '\n' {
			t.Fatalf("%v: header length %d, total %d (want multiple of 64 ending in newline)", dims, hlen, len(h))
		}
		dict := strings.TrimRight(string(h[10:len(h)-1]), " ")
		want := "{'descr': '|u1', 'fortran_order': False, 'shape': " + fmtDims(dims) + ", }"
		if dict != want {
			t.Fatalf("%v: dict %q, want %q", dims, dict, want)
		}
		got, n, err := readNPYHeader(bytes.NewReader(h))
		if err != nil || n != len(h) || fmtDims(got) != fmtDims(dims) {
			t.Fatalf("%v: read back %v %d %v", dims, got, n, err)
		}
	}
}

// TestNPYWriterMatchesNumPy: our file is byte for byte the one numpy.save
// wrote for the same array (golden file written by testdata/ref/npy_ref.py
// with Debian python3-numpy 1.24).
func TestNPYWriterMatchesNumPy(t *testing.T) {
	for _, tc := range []struct {
		file       string
		t, h, w, c int
	}{{"thwc_2x5x7x3.npy", 2, 5, 7, 3}, {"thwc_3x4x6x1.npy", 3, 4, 6, 1}} {
		want, err := os.ReadFile(filepath.Join("testdata", "npy", tc.file))
		if err != nil {
			t.Fatal(err)
		}
		got := encodeNPY(t, patternFrames(tc.t, tc.h, tc.w, tc.c), tc.c)
		if !bytes.Equal(got, want) {
			t.Errorf("%s: our bytes differ from numpy.save's\n got %q\nwant %q", tc.file, got[:min(len(got), 128)], want[:min(len(want), 128)])
		}
	}
}

// TestNPYUnknownCount writes without knowing the frame count; Close
// patches the header in place, giving numpy.save's bytes again.
func TestNPYUnknownCount(t *testing.T) {
	path := filepath.Join(t.TempDir(), "x.npy")
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	w, err := NewNPYWriter(f, 7, 5, 3, -1)
	if err != nil {
		t.Fatal(err)
	}
	for _, fr := range patternFrames(2, 5, 7, 3) {
		if err := w.WriteFrame(fr); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	f.Close()
	got, _ := os.ReadFile(path)
	want, _ := os.ReadFile(filepath.Join("testdata", "npy", "thwc_2x5x7x3.npy"))
	if !bytes.Equal(got, want) {
		t.Fatalf("patched file differs from numpy.save's")
	}
	// Not seekable: an unknown count cannot be patched.
	w2, _ := NewNPYWriter(io.Discard, 2, 2, 3, -1)
	w2.WriteFrame(image.NewRGBA(image.Rect(0, 0, 2, 2)))
	if err := w2.Close(); err == nil {
		t.Fatal("unknown count on a plain writer: want an error")
	}
}

// TestNPYReadNumPyFiles loads the arrays NumPy wrote (golden inputs from
// testdata/ref/npy_ref.py) and compares every pixel with the formula.
func TestNPYReadNumPyFiles(t *testing.T) {
	for _, tc := range []struct {
		file          string
		t, h, w, c    int
		storedChannel int
	}{
		{"thwc_2x5x7x3.npy", 2, 5, 7, 3, 3},
		{"thwc_3x4x6x1.npy", 3, 4, 6, 1, 1},
		{"hwc_6x5x3.npy", 1, 6, 5, 3, 3},
		{"thw_4x3x5.npy", 4, 3, 5, 1, 1},
		{"v2_2x3x4x3.npy", 2, 3, 4, 3, 3},
	} {
		r, err := Open(filepath.Join("testdata", "npy", tc.file), Options{})
		if err != nil {
			t.Fatalf("%s: %v", tc.file, err)
		}
		info := r.Info()
		if info.Frames != tc.t || info.Height != tc.h || info.Width != tc.w || info.Channels != tc.c {
			t.Fatalf("%s: info %+v", tc.file, info)
		}
		got, err := ReadAll(r)
		r.Close()
		if err != nil {
			t.Fatalf("%s: %v", tc.file, err)
		}
		// For H×W×C and T×H×W the formula's axes are named differently:
		// rebuild the expected values from the file's own axes.
		want := patternFrames(tc.t, tc.h, tc.w, tc.c)
		if tc.file == "hwc_6x5x3.npy" {
			// (y, x, c) took the formula's (t, y, x) slots.
			want = hwcPattern(tc.h, tc.w)
		}
		if tc.file == "thw_4x3x5.npy" {
			want = patternFrames(tc.t, tc.h, tc.w, 1)
		}
		for k := range want {
			if !bytes.Equal(got[k].Pix, want[k].Pix) {
				t.Fatalf("%s: frame %d differs", tc.file, k)
			}
		}
	}
}

// hwcPattern is the formula for a 3-axis array whose axes are (y, x, c):
// value = (31 y + 7 x + 3 c) mod 256.
func hwcPattern(h, w int) []*image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, w, h))
	for y := 0; y < h; y++ {
		for x := 0; x < w; x++ {
			o := img.PixOffset(x, y)
			for c := 0; c < 3; c++ {
				img.Pix[o+c] = byte((31*y + 7*x + 3*c) % 256)
			}
			img.Pix[o+3] = 0xff
		}
	}
	return []*image.RGBA{img}
}

func TestNPYRejects(t *testing.T) {
	for file, want := range map[string]string{
		"bad_fortran_2x3x4x3.npy":  "fortran_order",
		"bad_float32_2x3x3.npy":    "want uint8",
		"bad_channels_1x2x2x4.npy": "4 channels",
		"bad_rank2_4x4.npy":        "want T×H×W×C",
	} {
		_, err := Open(filepath.Join("testdata", "npy", file), Options{})
		if err == nil || !strings.Contains(err.Error(), want) || !strings.Contains(err.Error(), file) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error %v, want one line naming the file and %q", file, err, want)
		}
	}
	good := encodeNPY(t, patternFrames(2, 3, 4, 3), 3)
	hdr := len(NPYHeader([]int{2, 3, 4, 3}))
	cases := map[string][]byte{
		"truncated data":    good[:len(good)-1],
		"trailing data":     append(append([]byte{}, good...), 0),
		"bad magic":         append([]byte("\x93NUMPZ"), good[6:]...),
		"bad version":       append(append([]byte{}, good[:6]...), append([]byte{4, 0}, good[8:]...)...),
		"short header":      good[:hdr-5],
		"empty":             nil,
		"zero frames":       NPYHeader([]int{0, 3, 4, 3}),
		"huge frames":       NPYHeader([]int{1, 100000, 100000, 3}),
		"missing key":       npyWithDict("{'descr': '|u1', 'shape': (1, 1, 1, 3), }"),
		"extra key":         npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (1, 1, 1, 3), 'x': 1, }"),
		"duplicate key":     npyWithDict("{'descr': '|u1', 'descr': '|u1', 'fortran_order': False, 'shape': (1, 1, 1, 3), }"),
		"negative axis":     npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (-1, 1, 1, 3), }"),
		"one-axis no comma": npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (3), }"),
		"junk after dict":   npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (1, 1, 1, 3), } x"),
	}
	for name, data := range cases {
		r, err := NewNPYReader(bytes.NewReader(data), "x.npy")
		if err == nil {
			_, err = ReadAll(r)
		}
		if err == nil {
			t.Errorf("%s: accepted", name)
		} else if strings.Contains(err.Error(), "\n") || !strings.HasPrefix(err.Error(), "x.npy: ") {
			t.Errorf("%s: error %q: want one line naming the file", name, err)
		}
	}
	// Through a plain reader (no length known) truncation and trailing
	// bytes are found while reading.
	for name, data := range map[string][]byte{"truncated": good[:len(good)-1], "trailing": append(append([]byte{}, good...), 0)} {
		r, err := NewNPYReader(io.MultiReader(bytes.NewReader(data)), "s.npy")
		if err == nil {
			_, err = ReadAll(r)
		}
		if err == nil || errors.Is(err, io.EOF) {
			t.Errorf("stream %s: error %v", name, err)
		}
	}
}

// npyWithDict builds a version 1.0 preamble around dict, followed by one
// zero pixel (three bytes).
func npyWithDict(dict string) []byte {
	b := []byte("\x93NUMPY\x01\x00")
	b = binary.LittleEndian.AppendUint16(b, uint16(len(dict)+1))
	b = append(b, dict...)
	return append(b, '\n', 0, 0, 0)
}

// TestRefNPY is the live check against NumPy: numpy.load reads the files
// we write (shape, dtype, C order and data hash), and numpy.save of what
// it loaded gives our bytes back.
func TestRefNPY(t *testing.T) {
	reftest.Need(t, "numpy")
	dir := t.TempDir()
	for _, tc := range []struct{ t, h, w, c int }{{2, 5, 7, 3}, {3, 4, 6, 1}, {5, 96, 96, 3}, {1, 1, 1, 3}} {
		frames := patternFrames(tc.t, tc.h, tc.w, tc.c)
		data := encodeNPY(t, frames, tc.c)
		path := filepath.Join(dir, "f.npy")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		var got struct {
			Shape   []int  `json:"shape"`
			Dtype   string `json:"dtype"`
			Fortran bool   `json:"fortran"`
			SHA     string `json:"sha256"`
			Same    bool   `json:"same_bytes_as_numpy_save"`
			Pattern bool   `json:"matches_pattern"`
		}
		if err := json.Unmarshal(reftest.Run(t, "npy_ref.py", "check", path), &got); err != nil {
			t.Fatal(err)
		}
		hdr := len(NPYHeader([]int{tc.t, tc.h, tc.w, tc.c}))
		sum := sha256.Sum256(data[hdr:])
		if fmtDims(got.Shape) != fmtDims([]int{tc.t, tc.h, tc.w, tc.c}) || got.Dtype != "uint8" || got.Fortran ||
			got.SHA != hex.EncodeToString(sum[:]) || !got.Same || !got.Pattern {
			t.Errorf("%v: numpy says %+v", tc, got)
		}
	}
	// And the golden inputs are still what this NumPy writes.
	out := t.TempDir()
	reftest.Run(t, "npy_ref.py", "write", out)
	ents, _ := os.ReadDir(filepath.Join("testdata", "npy"))
	for _, e := range ents {
		a, _ := os.ReadFile(filepath.Join("testdata", "npy", e.Name()))
		b, err := os.ReadFile(filepath.Join(out, e.Name()))
		if err != nil || !bytes.Equal(a, b) {
			t.Errorf("golden %s differs from what NumPy writes now (%v)", e.Name(), err)
		}
	}
}

// FuzzReadNPY feeds arbitrary bytes to the reader: it must never panic,
// and whatever it accepts must write back to bytes it reads the same.
func FuzzReadNPY(f *testing.F) {
	ents, _ := os.ReadDir(filepath.Join("testdata", "npy"))
	for _, e := range ents {
		if b, err := os.ReadFile(filepath.Join("testdata", "npy", e.Name())); err == nil {
			f.Add(b)
		}
	}
	f.Add(npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (1, 1, 1, 3), }"))
	f.Add(npyWithDict("{\"shape\": (1,1,3,), \"fortran_order\": False, \"descr\": \"<u1\"}"))
	// Crafted headers that claim huge arrays over a few bytes of data.
	f.Add(npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (1, 100000, 100000, 3), }"))
	f.Add(npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (16777216, 8192, 4096, 1), }"))
	f.Add(npyWithDict("{'descr': '|u1', 'fortran_order': False, 'shape': (2, 20000, 20000), }"))
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := NewNPYReader(bytes.NewReader(data), "fuzz.npy")
		if err != nil {
			return
		}
		frames, err := ReadAll(r)
		if err != nil {
			return
		}
		s := r.Shape()
		again := encodeNPY(t, frames, s.Channels)
		r2, err := NewNPYReader(bytes.NewReader(again), "again.npy")
		if err != nil {
			t.Fatalf("re-encoded file refused: %v", err)
		}
		frames2, err := ReadAll(r2)
		if err != nil || len(frames2) != len(frames) {
			t.Fatalf("re-encoded file: %v", err)
		}
		for i := range frames {
			if !bytes.Equal(frames[i].Pix, frames2[i].Pix) {
				t.Fatalf("frame %d changed in the round trip", i)
			}
		}
	})
}

func BenchmarkNPYWrite96(b *testing.B) {
	frame := patternFrames(1, 96, 96, 3)[0]
	w, err := NewNPYWriter(io.Discard, 96, 96, 3, -1)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(96 * 96 * 3)
	b.ReportAllocs()
	for b.Loop() {
		if err := w.WriteFrame(frame); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkNPYRead96(b *testing.B) {
	const n = 64
	data := encodeNPY(b, patternFrames(n, 96, 96, 3), 3)
	dst := image.NewRGBA(image.Rect(0, 0, 96, 96))
	rd := bytes.NewReader(data)
	r, err := NewNPYReader(rd, "bench.npy")
	if err != nil {
		b.Fatal(err)
	}
	hdr := len(NPYHeader([]int{n, 96, 96, 3}))
	b.SetBytes(96 * 96 * 3)
	b.ReportAllocs()
	k := 0
	for b.Loop() {
		if k == n {
			rd.Reset(data)
			r.r.Reset(rd)
			r.r.Discard(hdr)
			r.next, k = 0, 0
		}
		if err := r.ReadFrame(dst); err != nil {
			b.Fatal(err)
		}
		k++
	}
}

// BenchmarkNPYCopyBaseline is the yardstick for the .npy benchmarks: a
// plain copy of one frame's RGBA bytes, in the same run.
func BenchmarkNPYCopyBaseline(b *testing.B) {
	src := patternFrames(1, 96, 96, 3)[0].Pix
	dst := make([]byte, len(src))
	b.SetBytes(96 * 96 * 3)
	b.ReportAllocs()
	for b.Loop() {
		copy(dst, src)
	}
}

// TestReadNPYArrayHeader: any dtype's header is read with its descr as
// written; readNPYHeader still takes uint8 only.
func TestReadNPYArrayHeader(t *testing.T) {
	for _, c := range []struct {
		descr string
		dims  []int
	}{{"|b1", []int{3600}}, {"<i8", []int{4}}, {"<f4", []int{2, 3}}} {
		h := NPYHeaderOf(c.descr, c.dims)
		d, dims, n, err := ReadNPYArrayHeader(bytes.NewReader(h))
		if err != nil || d != c.descr || fmtDims(dims) != fmtDims(c.dims) || n != len(h) {
			t.Errorf("%s %v: read %q %v %d %v", c.descr, c.dims, d, dims, n, err)
		}
		if _, _, err := readNPYHeader(bytes.NewReader(h)); err == nil || !strings.Contains(err.Error(), "want uint8") {
			t.Errorf("%s: readNPYHeader: %v", c.descr, err)
		}
	}
}

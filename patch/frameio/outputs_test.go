package frameio

import (
	"bytes"
	"image/color"
	"image/gif"
	"image/png"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

func listDir(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(dir)
	if os.IsNotExist(err) {
		return nil
	}
	if err != nil {
		t.Fatal(err)
	}
	var n []string
	for _, e := range ents {
		n = append(n, e.Name())
	}
	return n
}

func TestOutputsRoundTrip(t *testing.T) {
	dir := filepath.Join(t.TempDir(), "out")
	r, _ := Builtin("checker", 5, 24, 16)
	frames, _ := ReadAll(r)
	o, err := NewOutputs(OutputConfig{Dir: dir, Formats: []string{AsPNG, AsNPY, AsGIF, AsSheet}, Frames: 5}, 24, 16)
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range frames {
		if err := o.Add(f, f); err != nil {
			t.Fatal(err)
		}
		// Nothing visible before Commit.
		for _, n := range listDir(t, dir) {
			if !strings.HasPrefix(n, ".") {
				t.Fatalf("%s visible before commit", n)
			}
		}
	}
	files, err := o.Commit()
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"frame-00000.png", "frame-00001.png", "frame-00002.png", "frame-00003.png", "frame-00004.png", "frames.gif", "frames.npy", "sheet.png"}
	if got := listDir(t, dir); !slices.Equal(got, want) {
		t.Fatalf("folder holds %v, want %v", got, want)
	}
	if len(files) != len(want) {
		t.Fatalf("Commit listed %v", files)
	}
	// PNG through the stdlib decoder: exact.
	for k, f := range frames {
		b, _ := os.ReadFile(filepath.Join(dir, FrameName(k)))
		img, err := png.Decode(bytes.NewReader(b))
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(cloneRGBA(img).Pix, f.Pix) {
			t.Fatalf("PNG frame %d changed", k)
		}
	}
	// GIF through the stdlib decoder: exact for cube colours.
	gb, _ := os.ReadFile(filepath.Join(dir, "frames.gif"))
	g, err := gif.DecodeAll(bytes.NewReader(gb))
	if err != nil || len(g.Image) != 5 {
		t.Fatalf("gif: %v", err)
	}
	for k := range frames {
		if !bytes.Equal(cloneRGBA(g.Image[k]).Pix, frames[k].Pix) {
			t.Fatalf("GIF frame %d changed", k)
		}
	}
	// NPY through our reader (NumPy's side is TestRefNPY).
	nr, err := Open(filepath.Join(dir, "frames.npy"), Options{})
	if err != nil {
		t.Fatal(err)
	}
	back, err := ReadAll(nr)
	nr.Close()
	if err != nil || len(back) != 5 || !bytes.Equal(back[4].Pix, frames[4].Pix) {
		t.Fatalf("npy: %v", err)
	}
	sb, _ := os.ReadFile(filepath.Join(dir, "sheet.png"))
	if _, err := png.Decode(bytes.NewReader(sb)); err != nil {
		t.Fatalf("sheet: %v", err)
	}

	// A shorter export into the same folder replaces the sequence.
	o, _ = NewOutputs(OutputConfig{Dir: dir, Formats: []string{AsPNG}, Frames: 2}, 24, 16)
	o.Add(nil, frames[0])
	o.Add(nil, frames[1])
	if _, err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	if got := listDir(t, dir); !slices.Equal(got, []string{"frame-00000.png", "frame-00001.png", "frames.gif", "frames.npy", "sheet.png"}) {
		t.Fatalf("after a shorter export: %v", got)
	}
}

func TestOutputsAbortLeavesNothing(t *testing.T) {
	parent := t.TempDir()
	dir := filepath.Join(parent, "out")
	frame := solid(8, 8, color.RGBA{1, 2, 3, 255})
	o, err := NewOutputs(OutputConfig{Dir: dir, Formats: []string{AsPNG, AsNPY, AsGIF, AsSheet}, Frames: 3}, 8, 8)
	if err != nil {
		t.Fatal(err)
	}
	o.Add(frame, frame)
	o.Add(frame, frame)
	// A frame of the wrong size fails, and the caller aborts.
	if err := o.Add(frame, solid(9, 8, color.RGBA{})); err == nil {
		t.Fatal("wrong size accepted")
	}
	o.Abort()
	if got := listDir(t, parent); len(got) != 0 {
		t.Fatalf("abort left %v", got)
	}
	// Fewer frames than announced: Commit refuses and leaves nothing.
	existing := t.TempDir()
	os.WriteFile(filepath.Join(existing, "keep.txt"), []byte("x"), 0o644)
	o, _ = NewOutputs(OutputConfig{Dir: existing, Formats: []string{AsPNG, AsNPY}, Frames: 3}, 8, 8)
	o.Add(frame, frame)
	if _, err := o.Commit(); err == nil {
		t.Fatal("short sequence committed")
	}
	if got := listDir(t, existing); !slices.Equal(got, []string{"keep.txt"}) {
		t.Fatalf("failed commit left %v", got)
	}
	// Unknown frame count: the .npy header is patched at the end.
	unk := t.TempDir()
	o, _ = NewOutputs(OutputConfig{Dir: unk, Formats: []string{AsNPY}, Frames: -1}, 8, 8)
	for range 7 {
		o.Add(nil, frame)
	}
	if _, err := o.Commit(); err != nil {
		t.Fatal(err)
	}
	r, err := Open(filepath.Join(unk, "frames.npy"), Options{})
	if err != nil || r.Info().Frames != 7 {
		t.Fatalf("unknown-count npy: %v %+v", err, r)
	}
	r.Close()
	if _, err := ParseFormats("png,tiff"); err == nil || !strings.Contains(err.Error(), "tiff") {
		t.Fatalf("ParseFormats: %v", err)
	}
}

func TestSheet(t *testing.T) {
	s := NewSheet(SheetConfig{MaxFrames: 4, Total: 10, Columns: 2, Scale: 1})
	var shown []int
	for i := 0; i < 10; i++ {
		if s.Wants(i) {
			shown = append(shown, i)
		}
		f := solid(10, 6, color.RGBA{uint8(20 * i), 0, 0, 255})
		s.Add(i, f, solid(12, 6, color.RGBA{0, uint8(20 * i), 0, 255}))
	}
	if !slices.Equal(shown, []int{0, 3, 6, 9}) {
		t.Fatalf("sheet shows frames %v, want first, last and evenly between", shown)
	}
	img, err := s.Image()
	if err != nil {
		t.Fatal(err)
	}
	// Layout: margin 8 + 2 columns of (10 + 4 + 12 + 8); rows of 6+16+8.
	if b := img.Bounds(); b.Dx() != 8+2*(10+4+12+8) || b.Dy() != 8+2*(6+16+8) {
		t.Fatalf("sheet is %v", b)
	}
	// Pair 1 (frame 3) sits in column 1, row 0: original red 60, then
	// transformed green 60.
	if c := img.RGBAAt(8+34+1, 9); c != (color.RGBA{60, 0, 0, 255}) {
		t.Fatalf("original of frame 3: %v", c)
	}
	if c := img.RGBAAt(8+34+14+1, 9); c != (color.RGBA{0, 60, 0, 255}) {
		t.Fatalf("transformed of frame 3: %v", c)
	}
	// The label strip under each pair holds text pixels.
	text := 0
	for y := 8 + 6; y < 8+6+16; y++ {
		for x := 8; x < 8+34; x++ {
			if img.RGBAAt(x, y) == sheetText {
				text++
			}
		}
	}
	if text < 10 {
		t.Fatalf("label strip has %d text pixels", text)
	}
	if _, err := NewSheet(SheetConfig{}).Image(); err == nil {
		t.Fatal("empty sheet drawn")
	}
	// Unknown total: the first MaxFrames.
	s = NewSheet(SheetConfig{MaxFrames: 2})
	if !s.Wants(0) {
		t.Fatal("first frame not wanted")
	}
	s.Add(0, solid(2, 2, color.RGBA{}), solid(2, 2, color.RGBA{}))
	s.Add(1, solid(2, 2, color.RGBA{}), solid(2, 2, color.RGBA{}))
	if s.Wants(2) {
		t.Fatal("third frame wanted with MaxFrames 2")
	}
}

package frameio

import (
	"bytes"
	"image"
	"io"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/patch"
)

// exportFrames runs Transform over frames with spec on a grid of patch
// size ps (edge pad) and returns the exported .npy path and the manifest
// as read back from its file.
func exportFrames(t *testing.T, frames []*image.RGBA, ps int, spec patch.Spec, seed uint64) (string, *patch.Manifest, *patch.Grid) {
	t.Helper()
	b := frames[0].Bounds()
	g, err := patch.NewGrid(patch.GridConfig{Width: b.Dx(), Height: b.Dy(), PatchW: ps, Edge: patch.EdgePad})
	if err != nil {
		t.Fatal(err)
	}
	p, err := patch.NewPipeline(g, spec)
	if err != nil {
		t.Fatal(err)
	}
	p.Reset(seed)
	m := patch.NewManifest(g, spec, seed)
	dir := t.TempDir()
	out, err := NewOutputs(OutputConfig{Dir: dir, Formats: []string{AsNPY}, Frames: len(frames)}, g.OutW, g.OutH)
	if err != nil {
		t.Fatal(err)
	}
	n, err := Transform(&sliceReader{frames: frames}, patch.NewTokenizer(g), p, m, out, nil)
	if err != nil || n != len(frames) {
		t.Fatalf("transform: %d frames, %v", n, err)
	}
	if _, err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	mp := filepath.Join(dir, "manifest.json")
	if err := m.WriteFile(mp); err != nil {
		t.Fatal(err)
	}
	m2, err := patch.ReadManifestFile(mp, nil)
	if err != nil {
		t.Fatal(err)
	}
	return filepath.Join(dir, "frames.npy"), m2, g
}

// sliceReader serves frames from memory.
type sliceReader struct {
	frames []*image.RGBA
	i      int
}

func (s *sliceReader) Info() Info {
	b := s.frames[0].Bounds()
	return Info{Name: "mem", Width: b.Dx(), Height: b.Dy(), Channels: 3, Frames: len(s.frames)}
}

func (s *sliceReader) Next() (*image.RGBA, error) {
	if s.i >= len(s.frames) {
		return nil, io.EOF
	}
	s.i++
	return s.frames[s.i-1], nil
}

func (s *sliceReader) Close() error { return nil }

func invertFile(t *testing.T, path string, m *patch.Manifest, crop bool) []*image.RGBA {
	t.Helper()
	r, err := Open(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	w, h := InvertSize(m, crop)
	dir := t.TempDir()
	out, err := NewOutputs(OutputConfig{Dir: dir, Formats: []string{AsNPY}, Frames: r.Info().Frames}, w, h)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := Invert(r, m, crop, out, nil); err != nil {
		t.Fatal(err)
	}
	if _, err := out.Commit(); err != nil {
		t.Fatal(err)
	}
	br, err := Open(filepath.Join(dir, "frames.npy"), Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer br.Close()
	back, err := ReadAll(br)
	if err != nil {
		t.Fatal(err)
	}
	return back
}

// TestUnscrambleExact: unscramble(scramble(f)) == f byte for byte through
// the files, for a frame size the patch does not divide (edge pad, then
// crop to source), with rotations, flips, a changing permutation, noise
// tokens and duplicates.
func TestUnscrambleExact(t *testing.T) {
	r, _ := Builtin("drift", 9, 50, 38)
	frames, _ := ReadAll(r)
	for _, spec := range []patch.Spec{
		{Scramble: "full", Every: 3, Rotate: true, Flip: true, NoiseTokens: 3, Duplicates: 2},
		{Scramble: "local:1", Every: 1},
		{Scramble: "partial:0.5"},
	} {
		npy, m, g := exportFrames(t, frames, 8, spec, 7)
		ex, _ := Open(npy, Options{})
		exported, _ := ReadAll(ex)
		ex.Close()
		if b := exported[0].Bounds(); b.Dx() != g.OutW || b.Dy() != g.OutH || g.OutW != 56 || g.OutH != 40 {
			t.Fatalf("exported frames are %v, want the padded 56x40", b)
		}
		if bytes.Equal(cloneRGBA(exported[0].SubImage(image.Rect(0, 0, 50, 38))).Pix, frames[0].Pix) {
			t.Fatalf("%v: exported frame equals the source: nothing was scrambled", spec)
		}
		back := invertFile(t, npy, m, true)
		for k := range frames {
			if !bytes.Equal(back[k].Pix, frames[k].Pix) {
				t.Fatalf("%v: frame %d not restored byte for byte", spec, k)
			}
		}
		// Without cropping: the padded frame, source in the corner, pad black.
		padded := invertFile(t, npy, m, false)
		for k := range frames {
			if !bytes.Equal(cloneRGBA(padded[k].SubImage(image.Rect(0, 0, 50, 38))).Pix, frames[k].Pix) {
				t.Fatalf("frame %d: padded restore differs in the source area", k)
			}
			if c := padded[k].RGBAAt(55, 39); c.R|c.G|c.B != 0 {
				t.Fatalf("frame %d: pad is %v, want black", k, c)
			}
		}
	}
}

// TestUnscrambleDropped: with fill drop the kept tokens come back to
// their cells and the dropped cells come back black.
func TestUnscrambleDropped(t *testing.T) {
	r, _ := Builtin("drift", 4, 48, 32)
	frames, _ := ReadAll(r)
	spec := patch.Spec{Scramble: "full", Every: 2, Occlude: "random:0.3", Fill: "drop"}
	npy, m, g := exportFrames(t, frames, 8, spec, 11)
	back := invertFile(t, npy, m, true)
	for k := range frames {
		rec := m.Frames[k]
		// round-half-even(0.3·24 = 7.2) = 7 cells (the random:R rule).
		if len(rec.Mask) != 7 {
			t.Fatalf("frame %d: %d cells dropped, want 7 of 24", k, len(rec.Mask))
		}
		hidden := map[int]bool{}
		for _, c := range rec.Mask {
			hidden[c] = true
		}
		for i := 0; i < g.N(); i++ {
			rc := g.Rect(g.Cell(i))
			got := cloneRGBA(back[k].SubImage(rc))
			if hidden[i] {
				for p := 0; p < len(got.Pix); p += 4 {
					if got.Pix[p]|got.Pix[p+1]|got.Pix[p+2] != 0 {
						t.Fatalf("frame %d cell %d was dropped but is not black", k, i)
					}
				}
			} else if !bytes.Equal(got.Pix, cloneRGBA(frames[k].SubImage(rc)).Pix) {
				t.Fatalf("frame %d cell %d not restored", k, i)
			}
		}
	}
}

func TestInvertMismatch(t *testing.T) {
	r, _ := Builtin("drift", 3, 32, 32)
	frames, _ := ReadAll(r)
	_, m, _ := exportFrames(t, frames, 8, patch.Spec{Scramble: "full"}, 1)
	other, _ := Builtin("drift", 3, 40, 32)
	err := CheckInvertible(other.Info(), m)
	oneLine(t, err, "40x32", "32x32", "manifest does not match")
	longer, _ := Builtin("drift", 4, 32, 32)
	err = CheckInvertible(longer.Info(), m)
	oneLine(t, err, "4 frames", "records 3")
	// A stream of unknown length is checked at its end.
	out, _ := NewOutputs(OutputConfig{Dir: t.TempDir(), Formats: []string{AsNPY}, Frames: -1}, 32, 32)
	defer out.Abort()
	_, err = Invert(&unknownLen{longer}, m, false, out, nil)
	oneLine(t, err, "manifest")
	if !strings.Contains(err.Error(), "more frames") {
		t.Fatalf("error %v", err)
	}
}

type unknownLen struct{ Reader }

func (u *unknownLen) Info() Info { i := u.Reader.Info(); i.Frames = -1; return i }

// repeatReader serves one frame n times.
type repeatReader struct {
	frame *image.RGBA
	n, i  int
}

func (r *repeatReader) Info() Info {
	return Info{Name: "repeat", Width: r.frame.Rect.Dx(), Height: r.frame.Rect.Dy(), Channels: 3, Frames: r.n}
}

func (r *repeatReader) Next() (*image.RGBA, error) {
	if r.i >= r.n {
		return nil, io.EOF
	}
	r.i++
	return r.frame, nil
}

func (r *repeatReader) Close() error { return nil }

// BenchmarkTransform96 is the per-frame cost of the export flow on a
// 96×96 frame (tokenize → scramble+occlude → assemble → hand over),
// without file output; steady state allocates nothing per frame.
func BenchmarkTransform96(b *testing.B) {
	r, _ := Builtin("drift", 1, 96, 96)
	frame, _ := r.Next()
	g, _ := patch.NewGrid(patch.GridConfig{Width: 96, Height: 96, PatchW: 8})
	p, err := patch.NewPipeline(g, patch.Spec{Scramble: "full", Every: 1, Occlude: "random:0.25"})
	if err != nil {
		b.Fatal(err)
	}
	p.Reset(1)
	out, err := NewOutputs(OutputConfig{Dir: b.TempDir(), Frames: b.N}, 96, 96)
	if err != nil {
		b.Fatal(err)
	}
	defer out.Abort()
	tok := patch.NewTokenizer(g)
	b.ReportAllocs()
	b.ResetTimer()
	if _, err := Transform(&repeatReader{frame: frame, n: b.N}, tok, p, nil, out, nil); err != nil {
		b.Fatal(err)
	}
}

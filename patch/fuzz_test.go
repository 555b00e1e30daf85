package patch

import (
	"bytes"
	"image"
	"strings"
	"testing"
)

// FuzzParseSpec: ParseSpec never panics; what it accepts is a valid spec
// whose String reads back to the same spec, and a pipeline built from it
// on a small grid runs a step.
func FuzzParseSpec(f *testing.F) {
	for _, s := range []string{
		"none", "", "scramble=full every=0", "scramble=partial:0.5 rotate flip",
		"scramble=local:2 every=10 occlude=sweep:0.3:2 fill=noise",
		"occlude=bands:0.25:v fill=drop noise-tokens=3 duplicates=2",
		"occlude=block:1 fill=mean brightness=-0.2 contrast=1.5 shift=0.1,0,-0.1 pixel-noise=0.05",
		`occlude="mask:a b.png"`, "scramble=partial:1.5", "every=-1", "shift=1,2", "occlude=random:.5",
		"corrupt=blur:2,jpeg:40,shift:3:0,shake:2,rotate:3,scale:0.95,resolution:0.5,gamma:1.5,sharpen:1,saltpepper:0.01,motionblur:5:30",
		"corrupt=blur:s3", "corrupt=shift:s2:wrap,dead:s1", "corrupt=shift:-20:7:edge", "corrupt=resolution:0.01",
		"corrupt=blur:", "corrupt=blur:s6", "corrupt=fog:1", "corrupt=shift:1:2:3", "corrupt=motionblur:64:-360",
		"scramble=full corrupt=shake:4:wrap", "corrupt=,", "corrupt=none",
	} {
		f.Add(s)
	}
	g, err := NewGrid(GridConfig{Width: 12, Height: 8, PatchW: 4})
	if err != nil {
		f.Fatal(err)
	}
	src := NewTokenSet(g.N(), g.D())
	for i := 0; i < g.N(); i++ {
		src.Pos[i] = g.Cell(i)
	}
	src.N = g.N()
	f.Fuzz(func(t *testing.T, line string) {
		s, err := ParseSpec(line)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error not one line: %q", err)
			}
			return
		}
		back, err := ParseSpec(s.String())
		if err != nil {
			t.Fatalf("String %q does not read back: %v", s.String(), err)
		}
		if back.String() != s.String() {
			t.Fatalf("%q → %q", s.String(), back.String())
		}
		if strings.HasPrefix(s.Occlude, "mask:") {
			return
		}
		if s.NoiseTokens > 64 || s.Duplicates > 64 {
			return
		}
		p, err := NewPipeline(g, s)
		if err != nil {
			return // e.g. nothing: only rotation of square patches can fail here
		}
		p.Reset(1)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		for step := 0; step < 3; step++ {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			// Frame corruptions run on any accepted list and keep the
			// frame's size.
			f, err := p.CorruptFrame(step, fuzzFrame)
			if err != nil || f.Rect != fuzzFrame.Rect {
				t.Fatalf("%q: corrupt frame %v: %v", s.Corrupt, f.Rect, err)
			}
			if err := p.TokenizeFrame(step, NewTokenizer(g), fuzzFrame, src); err != nil {
				t.Fatal(err)
			}
		}
	})
}

// fuzzFrame is a 12x8 frame for FuzzParseSpec's corruptions.
var fuzzFrame = func() *image.RGBA {
	im := image.NewRGBA(image.Rect(0, 0, 12, 8))
	for i := range im.Pix {
		im.Pix[i] = uint8(i * 37)
	}
	return im
}()

// FuzzExpandCorrupt: ExpandCorrupt never panics, errors are one line, and
// every value it gives is a canonical corruption list.
func FuzzExpandCorrupt(f *testing.F) {
	for _, s := range []string{"none", "blur:s1:s5", "blur:0:3:1", "jpeg:20:60:20", "shift:3:0+blur:1", "rotate:-2:2:0.5",
		"blur:s3:s1", "blur:0:1e9:1e-9", "shift:0:16:8", "motionblur:5:30", "fog:0:1:1", "+", ""} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, item string) {
		vals, err := ExpandCorrupt(item)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error not one line: %q", err)
			}
			return
		}
		for _, v := range vals {
			c, err := CanonCorrupt(v)
			if err != nil || c != v {
				t.Fatalf("%q gave %q, which reads back as %q (%v)", item, v, c, err)
			}
		}
	})
}

// FuzzReadManifest: ReadManifest never panics; an accepted manifest
// writes and reads back to the same records, and every frame can be
// unscrambled from a token set of the recorded size.
func FuzzReadManifest(f *testing.F) {
	g, err := NewGrid(GridConfig{Width: 8, Height: 8, PatchW: 4})
	if err != nil {
		f.Fatal(err)
	}
	for _, spec := range []Spec{
		{Scramble: "full", Rotate: true, Flip: true, NoiseTokens: 1, Duplicates: 1},
		{Occlude: "random:0.5", Fill: "drop"},
		{},
	} {
		p, _ := NewPipeline(g, spec)
		p.Reset(3)
		m := NewManifest(g, spec, 3)
		src := NewTokenSet(g.N(), g.D())
		for i := 0; i < g.N(); i++ {
			src.Pos[i] = g.Cell(i)
		}
		src.N = g.N()
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		for step := 0; step < 2; step++ {
			p.Apply(step, src, dst, &rec)
			m.Append(&rec)
		}
		var buf bytes.Buffer
		m.Write(&buf)
		f.Add(buf.Bytes())
	}
	f.Add([]byte(`{"format":1}`))
	f.Add([]byte(`{"format":1,"grid":{"width":-1}}`))
	f.Fuzz(func(t *testing.T, data []byte) {
		m, err := ReadManifest(bytes.NewReader(data), nil)
		if err != nil {
			if strings.Contains(err.Error(), "\n") {
				t.Fatalf("error not one line: %q", err)
			}
			return
		}
		mg := m.GridOf()
		if mg.N() > 4096 {
			return
		}
		for i := range m.Frames {
			r := &m.Frames[i]
			src := NewTokenSet(len(r.Perm), mg.D())
			src.N = len(r.Perm)
			dst := NewTokenSet(mg.N(), mg.D())
			if err := r.Unscramble(mg, src, dst); err != nil {
				t.Fatalf("accepted frame %d does not unscramble: %v", r.Frame, err)
			}
		}
		var buf bytes.Buffer
		if err := m.Write(&buf); err != nil {
			t.Fatal(err)
		}
		m2, err := ReadManifest(&buf, mg)
		if err != nil {
			t.Fatalf("written manifest does not read back: %v", err)
		}
		if len(m2.Frames) != len(m.Frames) {
			t.Fatal("frames lost")
		}
	})
}

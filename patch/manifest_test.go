package patch

import (
	"bytes"
	"encoding/json"
	"image"
	"image/color"
	"os"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
)

func manifestRun(t *testing.T, g *Grid, spec Spec, seed uint64, frames int) (*Manifest, []*TokenSet, []*TokenSet) {
	t.Helper()
	p := mustPipe(t, g, spec)
	p.Reset(seed)
	m := NewManifest(g, spec, seed)
	var srcs, outs []*TokenSet
	var rec FrameRecord
	for step := 0; step < frames; step++ {
		_, _, src := tokensOf(t, g, uint64(100+step))
		dst := NewTokenSet(p.Capacity(), g.D())
		if err := p.Apply(step, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
		m.Append(&rec)
		srcs, outs = append(srcs, src), append(outs, dst)
	}
	return m, srcs, outs
}

// Write → ReadManifest gives the same records; replaying the pipeline from
// the manifest's seed and spec gives identical records and bytes; the
// manifest unscrambles every frame exactly.
func TestManifestRoundTripReplay(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 30, Height: 20, PatchW: 5, Edge: EdgeCrop})
	for _, spec := range []Spec{
		{Scramble: "full", Every: 2, Rotate: true, Flip: true, Occlude: "sweep:0.2", NoiseTokens: 2, Duplicates: 1},
		{Scramble: "partial:0.5", Occlude: "random:0.25", Fill: "drop", PixelNoise: 0.05},
		{Scramble: "local:1", Every: 1, Occlude: "bands:0.3", Fill: "mean", Brightness: 0.1},
		{},
	} {
		m, srcs, outs := manifestRun(t, g, spec, 77, 6)
		path := filepath.Join(t.TempDir(), "manifest.json")
		if err := m.WriteFile(path); err != nil {
			t.Fatal(err)
		}
		raw, _ := os.ReadFile(path)
		if !bytes.Contains(raw, []byte(`"format": 1`)) {
			t.Fatal("manifest lacks \"format\": 1")
		}
		back, err := ReadManifestFile(path, g)
		if err != nil {
			t.Fatal(err)
		}
		if !reflect.DeepEqual(back.Frames, m.Frames) || back.Spec != spec || back.Seed != 77 {
			t.Fatalf("%v: manifest changed on the way through JSON", spec)
		}
		p, err := back.NewPipeline()
		if err != nil {
			t.Fatal(err)
		}
		var rec FrameRecord
		for step, src := range srcs {
			dst := NewTokenSet(p.Capacity(), g.D())
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			want := back.Frames[step]
			if !reflect.DeepEqual(normRec(rec), normRec(want)) {
				t.Fatalf("%v step %d: replayed record differs:\n%+v\n%+v", spec, step, rec, want)
			}
			if r1, r2 := normRec(rec), normRec(want); digest(dst, &r1) != digest(outs[step], &r2) {
				t.Fatalf("%v step %d: replayed bytes differ", spec, step)
			}
			// Unscramble: real tokens come back to their source cells.
			un := NewTokenSet(g.N(), g.D())
			if err := back.Unscramble(step, outs[step], un); err != nil {
				t.Fatal(err)
			}
			occ := map[int]bool{}
			for _, c := range want.Mask {
				occ[c] = true
			}
			base := src
			if spec.PixelNoise != 0 || spec.Brightness != 0 || spec.Fill != "" && spec.Fill != "drop" && len(want.Mask) > 0 {
				continue // values changed on purpose; the scramble inversion is checked below
			}
			for j := 0; j < g.N(); j++ {
				if occ[j] {
					if un.Pos[j] != NoCell && spec.Fill == "drop" {
						t.Fatal("dropped cell came back")
					}
					continue
				}
				if un.Pos[j] != g.Cell(j) || !equalF32(un.Token(j), base.Token(j)) {
					t.Fatalf("%v step %d: cell %d not restored", spec, step, j)
				}
			}
		}
	}
}

// normRec makes empty and nil slices equal, as JSON does.
func normRec(r FrameRecord) FrameRecord {
	if len(r.Orient) == 0 {
		r.Orient = nil
	}
	if len(r.Mask) == 0 {
		r.Mask = []int{}
	}
	return r
}

// unscramble(scramble(f)) = f byte for byte through the manifest, frame
// pixels included, for a grid with padding.
func TestManifestUnscrambleFrame(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 30, Height: 22, PatchW: 6, Fill: 0})
	tk := NewTokenizer(g)
	f := randomRGBA(30, 22, 4)
	src := NewTokenSet(g.N(), g.D())
	if err := tk.Tokenize(f, src); err != nil {
		t.Fatal(err)
	}
	p := mustPipe(t, g, Spec{Scramble: "full", Rotate: true, Flip: true})
	p.Reset(3)
	m := NewManifest(g, p.Spec(), 3)
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(0, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	m.Append(&rec)
	var buf bytes.Buffer
	if err := m.Write(&buf); err != nil {
		t.Fatal(err)
	}
	m2, err := ReadManifest(&buf, g)
	if err != nil {
		t.Fatal(err)
	}
	scr := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	if err := tk.Assemble(dst, scr); err != nil {
		t.Fatal(err)
	}
	// Re-tokenize the scrambled picture (as an export would), then invert.
	g2 := mustGrid(t, GridConfig{Width: g.OutW, Height: g.OutH, PatchW: 6})
	again := NewTokenSet(g2.N(), g2.D())
	if err := NewTokenizer(g2).Tokenize(scr, again); err != nil {
		t.Fatal(err)
	}
	un := NewTokenSet(g.N(), g.D())
	if err := m2.Unscramble(0, again, un); err != nil {
		t.Fatal(err)
	}
	back := image.NewRGBA(scr.Rect)
	if err := tk.Assemble(un, back); err != nil {
		t.Fatal(err)
	}
	crop := back.SubImage(f.Rect).(*image.RGBA)
	for y := 0; y < 22; y++ {
		if !bytes.Equal(crop.Pix[crop.PixOffset(0, y):crop.PixOffset(30, y)], f.Pix[f.PixOffset(0, y):f.PixOffset(30, y)]) {
			t.Fatalf("row %d differs after unscramble", y)
		}
	}
	if bytes.Equal(scr.Pix, back.Pix) {
		t.Fatal("scramble changed nothing")
	}
}

func TestReadManifestErrors(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 4})
	m, _, _ := manifestRun(t, g, Spec{Scramble: "full", NoiseTokens: 1, Occlude: "random:0.25"}, 1, 2)
	var buf bytes.Buffer
	m.Write(&buf)
	good := buf.String()
	other := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 8})
	if _, err := ReadManifest(strings.NewReader(good), other); err == nil || !strings.Contains(err.Error(), "made for grid") {
		t.Fatalf("grid mismatch: %v", err)
	}
	var doc map[string]any
	json.Unmarshal([]byte(good), &doc)
	edit := func(f func(d map[string]any)) string {
		var d map[string]any
		json.Unmarshal([]byte(good), &d)
		f(d)
		b, _ := json.Marshal(d)
		return string(b)
	}
	frame0 := func(d map[string]any) map[string]any { return d["frames"].([]any)[0].(map[string]any) }
	cases := map[string]string{
		"empty":         "",
		"not json":      "{format: 1}",
		"trailing":      good + "{}",
		"format 2":      edit(func(d map[string]any) { d["format"] = 2 }),
		"bad edge":      edit(func(d map[string]any) { d["grid"].(map[string]any)["edge"] = "wrap" }),
		"cols disagree": edit(func(d map[string]any) { d["grid"].(map[string]any)["cols"] = 5 }),
		"bad spec":      edit(func(d map[string]any) { d["spec"].(map[string]any)["scramble"] = "most" }),
		"unknown field": edit(func(d map[string]any) { d["colour"] = 1 }),
		"dup perm":      edit(func(d map[string]any) { p := frame0(d)["perm"].([]any); p[1] = p[0] }),
		"perm range":    edit(func(d map[string]any) { frame0(d)["perm"].([]any)[0] = 99 }),
		"short perm":    edit(func(d map[string]any) { f := frame0(d); f["perm"] = f["perm"].([]any)[:5] }),
		"noise perm":    edit(func(d map[string]any) { p := frame0(d)["perm"].([]any); p[len(p)-1] = 3 }),
		"mask order":    edit(func(d map[string]any) { m := frame0(d)["mask"].([]any); m[0], m[1] = m[1], m[0] }),
		"orient":        edit(func(d map[string]any) { frame0(d)["orient"] = make([]any, 5) }),
		"frame order":   edit(func(d map[string]any) { frame0(d)["frame"] = 5 }),
		"real count":    edit(func(d map[string]any) { frame0(d)["real"] = 3 }),
	}
	for name, doc := range cases {
		_, err := ReadManifest(strings.NewReader(doc), g)
		if err == nil {
			t.Errorf("%s: accepted", name)
			continue
		}
		if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: error not one line: %q", name, err)
		}
	}
	if _, err := ReadManifest(strings.NewReader(good), nil); err != nil {
		t.Fatalf("good manifest rejected: %v", err)
	}
}

// A failed WriteFile leaves nothing behind.
func TestManifestWriteFileAtomic(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 8, Height: 8, PatchW: 4})
	m := NewManifest(g, Spec{}, 0)
	if err := m.WriteFile(filepath.Join(t.TempDir(), "missing-dir", "m.json")); err == nil {
		t.Fatal("write into a missing folder succeeded")
	}
}

// The picture of a scrambled step (dropped tokens, noise tokens,
// duplicates, rotations), tokenized again in grid order, unscrambles to
// the original frame except for the dropped cells, which come back black.
func TestUnscramblePicture(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 28, Height: 20, PatchW: 4, Edge: EdgePad})
	tk := NewTokenizer(g)
	f := randomRGBA(28, 20, 6)
	src := NewTokenSet(g.N(), g.D())
	if err := tk.Tokenize(f, src); err != nil {
		t.Fatal(err)
	}
	for _, spec := range []Spec{
		{Scramble: "full", Rotate: true, Flip: true, Occlude: "random:0.3", Fill: "drop", NoiseTokens: 3, Duplicates: 2},
		{Scramble: "local:1", Occlude: "block:0.2", Fill: "black", Duplicates: 4},
		{Scramble: "partial:0.4"},
	} {
		p := mustPipe(t, g, spec)
		p.Reset(8)
		m := NewManifest(g, spec, 8)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		if err := p.Apply(0, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
		m.Append(&rec)
		var buf bytes.Buffer
		m.Write(&buf)
		m2, err := ReadManifest(&buf, g)
		if err != nil {
			t.Fatal(err)
		}
		pic := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
		if err := tk.Assemble(dst, pic); err != nil {
			t.Fatal(err)
		}
		cg := g.Covered()
		cells := NewTokenSet(cg.N(), cg.D())
		if err := NewTokenizer(cg).Tokenize(pic, cells); err != nil {
			t.Fatal(err)
		}
		un := NewTokenSet(g.N(), g.D())
		if err := m2.UnscramblePicture(0, cells, un); err != nil {
			t.Fatal(err)
		}
		back := image.NewRGBA(pic.Rect)
		if err := tk.Assemble(un, back); err != nil {
			t.Fatal(err)
		}
		occ := map[int]bool{}
		for _, c := range rec.Mask {
			occ[c] = true
		}
		for j := 0; j < g.N(); j++ {
			r := g.Rect(g.Cell(j)).Intersect(f.Rect)
			for y := r.Min.Y; y < r.Max.Y; y++ {
				for x := r.Min.X; x < r.Max.X; x++ {
					got, want := back.RGBAAt(x, y), f.RGBAAt(x, y)
					if occ[j] {
						want = color.RGBA{0, 0, 0, 255}
					}
					if got != want {
						t.Fatalf("%v: cell %d pixel (%d,%d) = %v, want %v", spec, j, x, y, got, want)
					}
				}
			}
		}
	}
}

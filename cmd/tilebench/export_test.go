package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"image"
	"image/gif"
	"image/png"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"

	"tilebench/patch"
	"tilebench/patch/frameio"
)

// framesDir writes n frames of the drift scene at w×h as f0.png … in a
// folder, named so that a plain string sort would misorder them.
func framesDir(t *testing.T, n, w, h int) (string, []*image.RGBA) {
	t.Helper()
	dir := filepath.Join(t.TempDir(), "frames")
	os.Mkdir(dir, 0o755)
	r, err := frameio.Builtin("drift", n, w, h)
	if err != nil {
		t.Fatal(err)
	}
	frames, _ := frameio.ReadAll(r)
	for k, f := range frames {
		var b bytes.Buffer
		png.Encode(&b, f)
		if err := os.WriteFile(filepath.Join(dir, fmt.Sprintf("f%d.png", k)), b.Bytes(), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return dir, frames
}

func readNPY(t *testing.T, path string) []*image.RGBA {
	t.Helper()
	r, err := frameio.Open(path, frameio.Options{})
	if err != nil {
		t.Fatal(err)
	}
	defer r.Close()
	f, err := frameio.ReadAll(r)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

func mustRun(t *testing.T, stdin string, args ...string) string {
	t.Helper()
	code, out, errs := runCLI(t, stdin, args...)
	if code != 0 {
		t.Fatalf("tilebench %s: exit %d: %s", strings.Join(args, " "), code, errs)
	}
	return out
}

func crop(img *image.RGBA, r image.Rectangle) []byte {
	c := image.NewRGBA(image.Rect(0, 0, r.Dx(), r.Dy()))
	for y := 0; y < r.Dy(); y++ {
		copy(c.Pix[y*c.Stride:(y+1)*c.Stride], img.Pix[img.PixOffset(r.Min.X, r.Min.Y+y):])
	}
	return c.Pix
}

// TestExportInvocations runs the three command lines as written
// and checks their outputs, then the inverse byte for byte.
func TestExportInvocations(t *testing.T) {
	dir, frames := framesDir(t, 12, 60, 44) // 8 does not divide: padded to 64x48
	work := t.TempDir()
	out := filepath.Join(work, "OUT")
	mustRun(t, "", "export", "--in", dir, "--patch", "8", "--edge", "pad", "--scramble", "full", "--every", "0",
		"--occlude", "random:0.25", "--fill", "black", "--seed", "7", "--out", out, "--as", "png,npy,gif,sheet")
	for _, f := range []string{"frame-00000.png", "frame-00011.png", "frames.npy", "frames.gif", "sheet.png", "manifest.json"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Fatalf("missing output %s", f)
		}
	}
	if _, err := os.Stat(filepath.Join(out, "frame-00012.png")); err == nil {
		t.Fatal("13 PNG frames for 12 inputs")
	}
	exported := readNPY(t, filepath.Join(out, "frames.npy"))
	if len(exported) != 12 || exported[0].Rect.Dx() != 64 || exported[0].Rect.Dy() != 48 {
		t.Fatalf("frames.npy: %d frames of %v, want 12 of the padded 64x48", len(exported), exported[0].Rect)
	}
	// The PNG frames and the .npy hold the same pixels (stdlib decoder).
	pb, _ := os.ReadFile(filepath.Join(out, "frame-00005.png"))
	pimg, err := png.Decode(bytes.NewReader(pb))
	if err != nil || !bytes.Equal(pimg.(*image.RGBA).Pix, exported[5].Pix) {
		t.Fatalf("frame-00005.png differs from frames.npy[5] (%v)", err)
	}
	gb, _ := os.ReadFile(filepath.Join(out, "frames.gif"))
	if g, err := gif.DecodeAll(bytes.NewReader(gb)); err != nil || len(g.Image) != 12 || g.Config.Width != 64 {
		t.Fatalf("frames.gif: %v", err)
	}
	man, err := patch.ReadManifestFile(filepath.Join(out, "manifest.json"), nil)
	if err != nil || len(man.Frames) != 12 {
		t.Fatalf("manifest: %v", err)
	}

	// Same seed, same bytes.
	again := filepath.Join(work, "AGAIN")
	mustRun(t, "", "export", "--in", dir, "--patch", "8", "--edge", "pad", "--scramble", "full", "--every", "0",
		"--occlude", "random:0.25", "--fill", "black", "--seed", "7", "--out", again, "--as", "npy")
	for _, f := range []string{"frames.npy", "manifest.json"} {
		a, _ := os.ReadFile(filepath.Join(out, f))
		b, _ := os.ReadFile(filepath.Join(again, f))
		if !bytes.Equal(a, b) {
			t.Fatalf("%s differs between two runs with seed 7", f)
		}
	}

	// Invocation 2: back in order. Occluded cells stay black; every other
	// pixel is the source's (padding black).
	back := filepath.Join(work, "BACK")
	mustRun(t, "", "export", "--in", filepath.Join(out, "frames.npy"), "--unscramble", filepath.Join(out, "manifest.json"), "--out", back, "--as", "npy")
	restored := readNPY(t, filepath.Join(back, "frames.npy"))
	g := man.GridOf()
	for k := range frames {
		hidden := map[int]bool{}
		for _, c := range man.Frames[k].Mask {
			hidden[c] = true
		}
		if len(hidden) != 12 { // round-half-even(0.25 · 8·6 cells) = 12
			t.Fatalf("frame %d: %d cells occluded, want 12", k, len(hidden))
		}
		padded := image.NewRGBA(image.Rect(0, 0, 64, 48))
		for y := 0; y < 44; y++ {
			copy(padded.Pix[padded.PixOffset(0, y):], frames[k].Pix[frames[k].PixOffset(0, y):frames[k].PixOffset(60, y)])
		}
		for y := range padded.Rect.Dy() {
			for x := 60; x < 64; x++ {
				padded.Pix[padded.PixOffset(x, y)+3] = 255
			}
		}
		for y := 44; y < 48; y++ {
			for x := 0; x < 60; x++ {
				padded.Pix[padded.PixOffset(x, y)+3] = 255
			}
		}
		for i := 0; i < g.N(); i++ {
			rc := g.Rect(g.Cell(i))
			got := crop(restored[k], rc)
			want := crop(padded, rc)
			if hidden[i] {
				want = crop(image.NewRGBA(image.Rect(0, 0, 8, 8)), image.Rect(0, 0, 8, 8))
				for p := 3; p < len(want); p += 4 {
					want[p] = 255
				}
			}
			if !bytes.Equal(got, want) {
				t.Fatalf("frame %d cell %d (occluded %v) not restored", k, i, hidden[i])
			}
		}
	}

	// unscramble(scramble(f)) == f byte for byte through the files.
	pure := filepath.Join(work, "PURE")
	mustRun(t, "", "export", "--in", dir, "--patch", "8", "--scramble", "full", "--rotate", "--flip", "--every", "4", "--noise-tokens", "2", "--seed", "3", "--out", pure, "--as", "npy,png,sheet")
	pureBack := filepath.Join(work, "PUREBACK")
	mustRun(t, "", "export", "--in", pure, "--unscramble", filepath.Join(pure, "manifest.json"), "--crop-to-source", "--out", pureBack, "--as", "npy,png")
	got := readNPY(t, filepath.Join(pureBack, "frames.npy"))
	for k := range frames {
		if !bytes.Equal(got[k].Pix, frames[k].Pix) {
			t.Fatalf("frame %d: unscramble(scramble(f)) != f", k)
		}
		pb, _ := os.ReadFile(filepath.Join(pureBack, frameio.FrameName(k)))
		img, err := png.Decode(bytes.NewReader(pb))
		if err != nil || !bytes.Equal(img.(*image.RGBA).Pix, frames[k].Pix) {
			t.Fatalf("restored PNG frame %d differs (%v)", k, err)
		}
	}

	// Invocation 3: an animated GIF in, a GIF out, a new permutation
	// every 10 frames.
	movie := filepath.Join(work, "movie.gif")
	cr, _ := frameio.Builtin("checker", 24, 48, 36)
	cframes, _ := frameio.ReadAll(cr)
	gw := &frameio.GIFWriter{Delay: 5}
	for _, f := range cframes {
		gw.Add(f)
	}
	var mb bytes.Buffer
	gw.Encode(&mb)
	os.WriteFile(movie, mb.Bytes(), 0o644)
	out2 := filepath.Join(work, "OUT2")
	mustRun(t, "", "export", "--in", movie, "--patch", "6", "--scramble", "local:1", "--every", "10", "--occlude", "sweep:0.3", "--out", out2, "--as", "gif")
	gb, _ = os.ReadFile(filepath.Join(out2, "frames.gif"))
	g2, err := gif.DecodeAll(bytes.NewReader(gb))
	if err != nil || len(g2.Image) != 24 || g2.Config.Width != 48 || g2.Config.Height != 36 {
		t.Fatalf("OUT2/frames.gif: %v", err)
	}
	m2, err := patch.ReadManifestFile(filepath.Join(out2, "manifest.json"), nil)
	if err != nil {
		t.Fatal(err)
	}
	for k, rec := range m2.Frames {
		if rec.Epoch != k/10 {
			t.Fatalf("frame %d: scramble epoch %d, want %d", k, rec.Epoch, k/10)
		}
	}
	if ents, _ := os.ReadDir(out2); len(ents) != 2 {
		t.Fatalf("OUT2 holds %d entries, want frames.gif and manifest.json", len(ents))
	}
}

func TestExportJSONAndBuiltin(t *testing.T) {
	out := filepath.Join(t.TempDir(), "o")
	stdout := mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "5", "--size", "40x24", "--patch", "8", "--out", out, "--as", "npy,sheet", "--sheet-grid", "--json")
	var s struct {
		Format int      `json:"format"`
		Frames int      `json:"frames"`
		Files  []string `json:"files"`
		Output struct{ Width, Height int }
	}
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatalf("--json output %q: %v", stdout, err)
	}
	if s.Format != 1 || s.Frames != 5 || len(s.Files) != 3 || s.Output.Width != 40 || s.Output.Height != 24 {
		t.Fatalf("summary %+v", s)
	}
	// Raw RGB24 on stdin.
	r, _ := frameio.Builtin("drift", 3, 16, 8)
	fr, _ := frameio.ReadAll(r)
	var raw []byte
	for _, f := range fr {
		for i := 0; i < len(f.Pix); i += 4 {
			raw = append(raw, f.Pix[i:i+3]...)
		}
	}
	out2 := filepath.Join(t.TempDir(), "raw")
	mustRun(t, string(raw), "export", "--in", "-", "--size", "16x8", "--patch", "4", "--out", out2, "--as", "npy")
	got := readNPY(t, filepath.Join(out2, "frames.npy"))
	if len(got) != 3 || !bytes.Equal(got[2].Pix, fr[2].Pix) {
		t.Fatalf("raw stdin export: %d frames", len(got))
	}
}

func TestExportHelp(t *testing.T) {
	code, out, _ := runCLI(t, "", "export", "-help")
	if code != 0 {
		t.Fatalf("exit %d", code)
	}
	for _, inv := range []string{
		"tilebench export --in FRAMES_DIR --patch 8 --edge pad --scramble full --every 0 --occlude random:0.25 --fill black --seed 7 --out OUT --as png,npy,gif,sheet",
		"tilebench export --in OUT/frames.npy --unscramble OUT/manifest.json --out BACK --as npy",
		"tilebench export --in movie.gif --patch 6 --scramble local:1 --every 10 --occlude sweep:0.3 --out OUT2 --as gif",
	} {
		if !strings.Contains(out, inv) {
			t.Errorf("help lacks the example %q", inv)
		}
	}
	// Every option is documented with an example.
	opts := regexp.MustCompile(`(?m)^  -(\S+)`).FindAllStringSubmatchIndex(out, -1)
	if len(opts) < 30 {
		t.Fatalf("help documents %d options", len(opts))
	}
	for i, m := range opts {
		end := len(out)
		if i+1 < len(opts) {
			end = opts[i+1][0]
		}
		if name := out[m[2]:m[3]]; !strings.Contains(out[m[0]:end], "e.g. --"+name) {
			t.Errorf("option -%s has no example", name)
		}
	}
}

// TestExportBadInput: each bad input gives one line on stderr naming the
// problem, exit 2 for usage and 1 for runtime, and writes nothing.
func TestExportBadInput(t *testing.T) {
	dir, _ := framesDir(t, 3, 32, 24)
	base := t.TempDir()
	good := filepath.Join(base, "good")
	mustRun(t, "", "export", "--in", dir, "--scramble", "full", "--out", good, "--as", "npy")
	other := filepath.Join(base, "other") // frames of another size
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "3", "--size", "40x24", "--out", other, "--as", "npy")
	longer := filepath.Join(base, "longer") // more frames
	mustRun(t, "", "export", "--in", "builtin:drift", "--frames", "4", "--size", "32x24", "--out", longer, "--as", "npy")

	mixed := filepath.Join(base, "mixed")
	os.Mkdir(mixed, 0o755)
	for i, w := range []int{16, 16, 16, 20} {
		var b bytes.Buffer
		png.Encode(&b, image.NewRGBA(image.Rect(0, 0, w, 16)))
		os.WriteFile(filepath.Join(mixed, fmt.Sprintf("m%d.png", i+1)), b.Bytes(), 0o644)
	}
	corrupt := filepath.Join(base, "corrupt")
	os.Mkdir(corrupt, 0o755)
	var b bytes.Buffer
	png.Encode(&b, image.NewRGBA(image.Rect(0, 0, 16, 16)))
	os.WriteFile(filepath.Join(corrupt, "c1.png"), b.Bytes(), 0o644)
	os.WriteFile(filepath.Join(corrupt, "c2.png"), b.Bytes()[:40], 0o644)
	empty := filepath.Join(base, "empty")
	os.Mkdir(empty, 0o755)
	badJSON := filepath.Join(base, "bad.json")
	os.WriteFile(badJSON, []byte(`{"format": 1, "grid": `), 0o644)
	badNPY := filepath.Join(base, "bad.npy")
	os.WriteFile(badNPY, []byte("\x93NUMPY\x01\x00\x10\x00{'descr': '<f4'"), 0o644)
	gm := filepath.Join(good, "manifest.json")

	for _, c := range []struct {
		name  string
		code  int
		want  string
		stdin string
		args  []string
	}{
		{"bad edge", 2, "diagonal", "", []string{"--in", dir, "--edge", "diagonal"}},
		{"ratio above 1", 2, "1.5", "", []string{"--in", dir, "--occlude", "random:1.5"}},
		{"ratio below 0", 2, "-0.2", "", []string{"--in", dir, "--scramble", "partial:-0.2"}},
		{"bad scramble", 2, "sideways", "", []string{"--in", dir, "--scramble", "sideways"}},
		{"bad fill", 2, "purple", "", []string{"--in", dir, "--occlude", "block:0.2", "--fill", "purple"}},
		{"patch larger than frame", 2, "larger", "", []string{"--in", dir, "--patch", "40"}},
		{"zero patch", 2, "patch", "", []string{"--in", dir, "--patch", "0"}},
		{"bad format", 2, "tiff", "", []string{"--in", dir, "--as", "png,tiff"}},
		{"bad fps", 2, "fps", "", []string{"--in", dir, "--fps", "0"}},
		{"unknown flag", 2, "nosuch", "", []string{"--in", dir, "--nosuch"}},
		{"not a number", 2, "every", "", []string{"--in", dir, "--every", "ten"}},
		{"no input", 2, "--in", "", []string{}},
		{"stdin without size", 2, "--size", "x", []string{"--in", "-"}},
		{"unscramble with a transform", 2, "--scramble", "", []string{"--in", filepath.Join(good, "frames.npy"), "--unscramble", gm, "--scramble", "full"}},
		{"crop without unscramble", 2, "--unscramble", "", []string{"--in", dir, "--crop-to-source"}},
		{"missing input", 1, "nowhere", "", []string{"--in", filepath.Join(base, "nowhere")}},
		{"empty folder", 1, "empty", "", []string{"--in", empty}},
		{"corrupt image", 1, "c2.png", "", []string{"--in", corrupt}},
		{"mixed sizes", 1, "m4.png", "", []string{"--in", mixed}},
		{"corrupt npy", 1, "bad.npy", "", []string{"--in", badNPY}},
		{"partial raw frame", 1, "partial frame", strings.Repeat("x", 16*8*3+5), []string{"--in", "-", "--size", "16x8", "--patch", "4"}},
		{"missing mask", 1, "nomask.png", "", []string{"--in", dir, "--occlude", "mask:" + filepath.Join(base, "nomask.png")}},
		{"corrupt manifest", 1, "bad.json", "", []string{"--in", filepath.Join(good, "frames.npy"), "--unscramble", badJSON}},
		{"manifest size mismatch", 1, "manifest does not match", "", []string{"--in", filepath.Join(other, "frames.npy"), "--unscramble", gm}},
		{"manifest count mismatch", 1, "manifest does not match", "", []string{"--in", filepath.Join(longer, "frames.npy"), "--unscramble", gm}},
	} {
		t.Run(c.name, func(t *testing.T) {
			out := filepath.Join(t.TempDir(), "out")
			args := append([]string{"export"}, c.args...)
			if c.name != "no input" {
				args = append(args, "--out", out, "--as", "png,npy,gif,sheet")
			}
			if c.name == "bad format" {
				args = append(args[:len(args)-4], "--out", out)
			}
			code, _, stderr := runCLI(t, c.stdin, args...)
			if code != c.code {
				t.Fatalf("exit %d, want %d (stderr %q)", code, c.code, stderr)
			}
			if strings.Count(stderr, "\n") != 1 || !strings.Contains(stderr, c.want) {
				t.Fatalf("stderr %q: want one line naming %q", stderr, c.want)
			}
			if _, err := os.Stat(out); !os.IsNotExist(err) {
				ents, _ := os.ReadDir(out)
				t.Fatalf("output folder left behind with %d entries", len(ents))
			}
		})
	}
}

// TestExportGreyAndCrop: one-channel tokens and --edge crop invert
// exactly too. Grey: the scrambled-then-restored frames equal the
// unscrambled grey export (luma of a grey pixel is the pixel: BT.601
// weights sum to 1). Crop: the restored frames are the source's covered
// top-left part.
func TestExportGreyAndCrop(t *testing.T) {
	dir, frames := framesDir(t, 5, 44, 30)
	w := t.TempDir()
	at := func(n string) string { return filepath.Join(w, n) }
	mustRun(t, "", "export", "--in", dir, "--channels", "1", "--out", at("plain"), "--as", "npy")
	mustRun(t, "", "export", "--in", dir, "--channels", "1", "--scramble", "full", "--rotate", "--every", "2", "--out", at("grey"), "--as", "npy")
	mustRun(t, "", "export", "--in", at("grey/frames.npy"), "--unscramble", at("grey/manifest.json"), "--out", at("greyback"), "--as", "npy")
	plain, back := readNPY(t, at("plain/frames.npy")), readNPY(t, at("greyback/frames.npy"))
	scr := readNPY(t, at("grey/frames.npy"))
	for k := range plain {
		if !bytes.Equal(plain[k].Pix, back[k].Pix) {
			t.Fatalf("grey frame %d not restored", k)
		}
		if bytes.Equal(plain[k].Pix, scr[k].Pix) {
			t.Fatalf("grey frame %d was not scrambled", k)
		}
	}
	r, _ := frameio.Open(at("grey/frames.npy"), frameio.Options{})
	if r.Info().Channels != 1 {
		t.Fatalf("grey export has %d channels", r.Info().Channels)
	}
	r.Close()

	mustRun(t, "", "export", "--in", dir, "--patch", "8", "--edge", "crop", "--scramble", "full", "--out", at("crop"), "--as", "npy")
	mustRun(t, "", "export", "--in", at("crop/frames.npy"), "--unscramble", at("crop/manifest.json"), "--crop-to-source", "--out", at("cropback"), "--as", "npy")
	cb := readNPY(t, at("cropback/frames.npy"))
	for k := range frames {
		if cb[k].Rect.Dx() != 40 || cb[k].Rect.Dy() != 24 || !bytes.Equal(cb[k].Pix, crop(frames[k], image.Rect(0, 0, 40, 24))) {
			t.Fatalf("cropped frame %d (%v) not restored", k, cb[k].Rect)
		}
	}
}

// Package golden compares rendered frames with committed PNG files, pixel
// for pixel, for the games' tests.
package golden

import (
	"flag"
	"fmt"
	"image"
	"image/png"
	"io"
	"os"
	"path/filepath"
	"testing"

	"tilebench/games"
	"tilebench/internal/atomicfile"
)

// Update is the -update test flag: rewrite the golden files instead of
// comparing.
var Update = flag.Bool("update", false, "rewrite the golden frames in testdata/golden")

// Path is the file name of a golden frame: testdata/golden/NAME.png.
func Path(name string) string { return filepath.Join("testdata", "golden", name+".png") }

// Check compares img with the golden PNG for name (or rewrites it with
// -update). It reports every difference as a test error naming the count
// of differing pixels and the first one.
func Check(t testing.TB, name string, img *image.RGBA) {
	t.Helper()
	path := Path(name)
	if *Update {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := atomicfile.Write(path, func(w io.Writer) error { return png.Encode(w, img) }); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := Load(path)
	if err != nil {
		t.Fatalf("golden frame: %v (run the test with -update to create it, then look at it)", err)
	}
	if n, first := Diff(img, want); n > 0 {
		t.Errorf("%s: %d pixels differ from the golden frame, first at %v", path, n, first)
	}
}

// Load decodes a PNG file.
func Load(path string) (image.Image, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		return nil, fmt.Errorf("decode %s: %w", path, err)
	}
	return img, nil
}

// Diff counts the pixels whose RGB differ between a and b (all of them if
// the sizes differ) and returns the first such pixel.
func Diff(a, b image.Image) (int, image.Point) {
	ab, bb := a.Bounds(), b.Bounds()
	if ab.Size() != bb.Size() {
		return ab.Dx() * ab.Dy(), image.Point{}
	}
	n := 0
	var first image.Point
	for y := 0; y < ab.Dy(); y++ {
		for x := 0; x < ab.Dx(); x++ {
			r1, g1, b1, _ := a.At(ab.Min.X+x, ab.Min.Y+y).RGBA()
			r2, g2, b2, _ := b.At(bb.Min.X+x, bb.Min.Y+y).RGBA()
			if r1 != r2 || g1 != g2 || b1 != b2 {
				if n == 0 {
					first = image.Pt(x, y)
				}
				n++
			}
		}
	}
	return n, first
}

// Case is one golden frame: the named game and variation, reset to Seed,
// played by its expert for Steps steps, then rendered.
type Case struct {
	Variation string
	Seed      uint64
	Steps     int
}

// CheckCases renders every case of the named game and checks it against
// testdata/golden/VARIATION-SEED-STEPS.png ("default" for the default
// variation).
func CheckCases(t *testing.T, game string, cases []Case) {
	t.Helper()
	for _, c := range cases {
		g, err := games.New(game, games.Options{Variation: c.Variation})
		if err != nil {
			t.Fatal(err)
		}
		ex, ok := g.(games.WithExpert)
		if !ok {
			t.Fatalf("%s has no expert", game)
		}
		g.Reset(c.Seed)
		act := make([]float64, g.Spec().Action.Dim())
		for k := 0; k < c.Steps; k++ {
			ex.Expert().Act(act)
			if _, err := g.Step(act); err != nil {
				t.Fatal(err)
			}
		}
		img := image.NewRGBA(image.Rect(0, 0, g.Spec().Width, g.Spec().Height))
		g.Render(img)
		name := c.Variation
		if name == "" {
			name = "default"
		}
		Check(t, fmt.Sprintf("%s-%d-%d", name, c.Seed, c.Steps), img)
	}
}

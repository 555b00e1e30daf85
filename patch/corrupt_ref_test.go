package patch

import (
	"encoding/json"
	"fmt"
	"image"
	"math"
	"os"
	"strconv"
	"testing"

	"tilebench/internal/reftest"
)

type corruptGolden struct {
	Format int `json:"format"`
	Frames map[string]struct {
		Width  int     `json:"width"`
		Height int     `json:"height"`
		RGB    []uint8 `json:"rgb"`
	} `json:"frames"`
	Cases []struct {
		Name     string    `json:"name"`
		Frame    string    `json:"frame"`
		Op       string    `json:"op"`
		Params   []float64 `json:"params"`
		Interior int       `json:"interior"`
		Out      []float64 `json:"out"`
	} `json:"cases"`
}

// corruptOne applies one corruption to img with a pipeline on a grid of
// img's size.
func corruptOne(t testing.TB, img *image.RGBA, corrupt string, seed uint64, step int) *image.RGBA {
	t.Helper()
	b := img.Bounds()
	g := mustGrid(t, GridConfig{Width: b.Dx(), Height: b.Dy(), PatchW: 1})
	p, err := NewPipeline(g, Spec{Corrupt: corrupt})
	if err != nil {
		t.Fatalf("%s: %v", corrupt, err)
	}
	p.Reset(seed)
	out, err := p.CorruptFrame(step, img)
	if err != nil {
		t.Fatalf("%s: %v", corrupt, err)
	}
	c := image.NewRGBA(out.Rect)
	copy(c.Pix, out.Pix)
	return c
}

func rgbFrame(w, h int, rgb []uint8) *image.RGBA {
	im := image.NewRGBA(image.Rect(0, 0, w, h))
	for i := 0; i < w*h; i++ {
		copy(im.Pix[4*i:4*i+3], rgb[3*i:3*i+3])
		im.Pix[4*i+3] = 255
	}
	return im
}

// checkCorruptGolden runs each case's corruption with tilebench's kernels
// and compares with SciPy ndimage / scikit-image (testdata/ref/corrupt_ref.py).
//
// Tolerance: 0.6 of a byte everywhere compared. Our output is rounded to
// whole bytes (≤ 0.5) and computed with float32 weights (≤ 0.05 more).
// Edges: blur is compared on the whole frame against SciPy's normalised
// convolution (the kernel renormalised over the taps inside the frame,
// imaging's edge rule) and on the interior only (pixels at least the
// kernel radius from the border) against SciPy's usual mode "reflect",
// which mirrors the frame at the edge and so differs there. Rotation and
// zoom match mode "grid-constant" (the pad value blends in bilinearly
// at the border) everywhere; resolution matches skimage's block mean
// (whole factors) followed by its bilinear resize with edge clamping
// everywhere; motion blur matches uniform_filter1d with mode "nearest".
func checkCorruptGolden(t *testing.T, data []byte) {
	t.Helper()
	var gf corruptGolden
	if err := json.Unmarshal(data, &gf); err != nil {
		t.Fatal(err)
	}
	if gf.Format != 1 || len(gf.Cases) < 20 {
		t.Fatalf("golden: format %d, %d cases", gf.Format, len(gf.Cases))
	}
	for _, c := range gf.Cases {
		fr := gf.Frames[c.Frame]
		img := rgbFrame(fr.Width, fr.Height, fr.RGB)
		num := func(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }
		var spec string
		switch c.Op {
		case "blur", "rotate", "scale", "resolution":
			spec = c.Op + ":" + num(c.Params[0])
		case "motionblur":
			spec = fmt.Sprintf("motionblur:%s:%s", num(c.Params[0]), num(c.Params[1]))
		default:
			t.Fatalf("%s: unknown op %q", c.Name, c.Op)
		}
		out := corruptOne(t, img, spec, 1, 0)
		W, H := fr.Width, fr.Height
		worst, at := 0.0, 0
		for y := c.Interior; y < H-c.Interior; y++ {
			for x := c.Interior; x < W-c.Interior; x++ {
				for ch := 0; ch < 3; ch++ {
					i := (y*W+x)*3 + ch
					d := math.Abs(float64(out.Pix[(y*W+x)*4+ch]) - c.Out[i])
					if d > worst {
						worst, at = d, i
					}
				}
			}
		}
		if worst > 0.6 {
			t.Errorf("%s (%s): worst difference %.3f at value %d (pixel %d,%d): ours %d, reference %.2f",
				c.Name, spec, worst, at, at/3%W, at/3/W, out.Pix[at/3*4+at%3], c.Out[at])
		}
		if c.Interior > 0 {
			// The edge rules do differ (renormalised taps against a
			// mirrored frame), which is why only the interior is compared.
			edge := 0.0
			for i, v := range c.Out {
				edge = math.Max(edge, math.Abs(float64(out.Pix[i/3*4+i%3])-v))
			}
			if edge <= 0.6 {
				t.Errorf("%s: the edges agree with mode reflect too (worst %.3f): compare the whole frame", c.Name, edge)
			}
		}
	}
}

// Blur, resolution, rotation, zoom and motion blur against SciPy ndimage
// and scikit-image (Debian python3-scipy, python3-skimage): golden file
// written by testdata/ref/corrupt_ref.py, committed.
func TestCorruptGolden(t *testing.T) {
	data, err := os.ReadFile("testdata/corrupt_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	checkCorruptGolden(t, data)
}

// TestRefCorrupt runs testdata/ref/corrupt_ref.py live (SciPy ndimage and
// scikit-image from Debian) and checks the kernels against its output.
func TestRefCorrupt(t *testing.T) {
	reftest.Need(t, "numpy", "scipy", "skimage")
	checkCorruptGolden(t, reftest.Run(t, "corrupt_ref.py"))
}

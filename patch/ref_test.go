package patch

import (
	"encoding/json"
	"image"
	"math"
	"os"
	"testing"

	"tilebench/internal/reftest"
)

// goldenCase is one geometry of testdata/ref/tokenize_ref.py's output.
type goldenCase struct {
	Name          string   `json:"name"`
	Width         int      `json:"width"`
	Height        int      `json:"height"`
	FrameChannels int      `json:"frame_channels"`
	Channels      int      `json:"channels"`
	PatchW        int      `json:"patch_w"`
	PatchH        int      `json:"patch_h"`
	StrideX       int      `json:"stride_x"`
	StrideY       int      `json:"stride_y"`
	Edge          string   `json:"edge"`
	Fill          float32  `json:"fill"`
	Frame         []uint8  `json:"frame"`
	N             int      `json:"n"`
	D             int      `json:"d"`
	Bits          []uint32 `json:"bits"`
}

type goldenFile struct {
	Format int          `json:"format"`
	Cases  []goldenCase `json:"cases"`
}

// checkGolden tokenizes every case's frame with the Go tokenizer and
// compares the float32 bit patterns with NumPy's.
func checkGolden(t *testing.T, data []byte) {
	t.Helper()
	var gf goldenFile
	if err := json.Unmarshal(data, &gf); err != nil {
		t.Fatal(err)
	}
	if gf.Format != 1 || len(gf.Cases) < 8 {
		t.Fatalf("golden file: format %d, %d cases", gf.Format, len(gf.Cases))
	}
	for _, c := range gf.Cases {
		edge, err := ParseEdge(c.Edge)
		if err != nil {
			t.Fatal(err)
		}
		g := mustGrid(t, GridConfig{Width: c.Width, Height: c.Height, Channels: c.Channels, PatchW: c.PatchW, PatchH: c.PatchH,
			StrideX: c.StrideX, StrideY: c.StrideY, Edge: edge, Fill: c.Fill})
		if g.N() != c.N || g.D() != c.D {
			t.Fatalf("%s: grid gives %d×%d tokens, NumPy %d×%d", c.Name, g.N(), g.D(), c.N, c.D)
		}
		var img image.Image
		if c.FrameChannels == 1 {
			im := image.NewGray(image.Rect(0, 0, c.Width, c.Height))
			copy(im.Pix, c.Frame)
			img = im
		} else {
			im := image.NewRGBA(image.Rect(0, 0, c.Width, c.Height))
			for i := 0; i < c.Width*c.Height; i++ {
				copy(im.Pix[4*i:4*i+3], c.Frame[3*i:3*i+3])
				im.Pix[4*i+3] = 255
			}
			img = im
		}
		ts := NewTokenSet(g.N(), g.D())
		if err := NewTokenizer(g).Tokenize(img, ts); err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		for i, b := range c.Bits {
			if got := math.Float32bits(ts.Data[i]); got != b {
				t.Fatalf("%s: value %d (token %d, index %d) = %v, NumPy %v", c.Name, i, i/c.D, i%c.D, ts.Data[i], math.Float32frombits(b))
			}
		}
	}
}

// Tokenize against NumPy reshape/transpose (Debian python3-numpy): golden
// file written by testdata/ref/tokenize_ref.py, committed.
func TestTokenizeGolden(t *testing.T) {
	data, err := os.ReadFile("testdata/tokenize_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	checkGolden(t, data)
}

// TestRefTokenize runs testdata/ref/tokenize_ref.py live (NumPy from
// Debian's python3-numpy) and checks the Go tokenizer against its output.
func TestRefTokenize(t *testing.T) {
	reftest.Need(t, "numpy")
	checkGolden(t, reftest.Run(t, "tokenize_ref.py"))
}

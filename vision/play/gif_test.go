package play_test

import (
	"bytes"
	"encoding/json"
	"image"
	"image/draw"
	"image/gif"
	"os"
	"path/filepath"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/play"
)

// encodeGIF writes frames through the GIF writer that play and export
// use.
func encodeGIF(t *testing.T, frames []*image.RGBA) []byte {
	t.Helper()
	gw := &frameio.GIFWriter{Delay: 5}
	for _, f := range frames {
		if err := gw.Add(f); err != nil {
			t.Fatal(err)
		}
	}
	var b bytes.Buffer
	if err := gw.Encode(&b); err != nil {
		t.Fatal(err)
	}
	return b.Bytes()
}

// gifCase is one game's frames, the GIF play wrote of them, and the
// frames image/gif decodes from it.
type gifCase struct {
	name            string
	frames, decoded []*image.RGBA
	colours         int
	gif             []byte
}

// maxGIFFrames is how many of an episode's first frames go to the GIF.
const maxGIFFrames = 240

// playGIF plays one expert episode of game name (default look, its
// frame size from the game's Spec), keeping the first frames the policy
// saw and the GIF written of them.
func playGIF(t *testing.T, name string) gifCase {
	t.Helper()
	g, err := games.Build(name, games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	// A patch size that divides the frame, so the frame the policy saw
	// is the frame the game drew, no padding.
	ps := 8
	for sp.Width%ps != 0 || sp.Height%ps != 0 {
		ps--
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: ps})
	if err != nil {
		t.Fatal(err)
	}
	pol, ok := vision.NewExpertPolicy(g)
	if !ok {
		t.Fatalf("%s ships no expert", name)
	}
	c := gifCase{name: name}
	// Keep the first frames the policy saw (a copy: the frame buffer is
	// reused), and draw the GIF of them with the writer play uses.
	cfg := play.Config{Game: g, Grid: grid, Policy: pol, Episodes: 1, Seed: games.HeldOutSeedStart,
		Picture: func(obs *vision.Observation) *image.RGBA {
			if len(c.frames) < maxGIFFrames {
				cp := image.NewRGBA(obs.Frame.Rect)
				draw.Draw(cp, cp.Rect, obs.Frame, obs.Frame.Rect.Min, draw.Src)
				c.frames = append(c.frames, cp)
			}
			return obs.Frame
		}, GIF: &frameio.GIFWriter{}} // Picture runs only when something is kept
	if _, err := play.Run(cfg); err != nil {
		t.Fatal(err)
	}
	c.gif = encodeGIF(t, c.frames)
	var counts frameio.ColorCounts
	for _, f := range c.frames {
		counts.Add(f)
	}
	dec, err := gif.DecodeAll(bytes.NewReader(c.gif))
	if err != nil {
		t.Fatalf("%s: image/gif cannot decode the GIF: %v", name, err)
	}
	if len(dec.Image) != len(c.frames) || len(c.frames) < 10 {
		t.Fatalf("%s: %d frames decoded, %d kept", name, len(dec.Image), len(c.frames))
	}
	for _, p := range dec.Image {
		m := image.NewRGBA(p.Rect)
		draw.Draw(m, m.Rect, p, p.Rect.Min, draw.Src)
		c.decoded = append(c.decoded, m)
	}
	c.colours = counts.Len()
	return c
}

// channelErrors returns the largest absolute difference per channel and
// the mean absolute difference over every channel of every pixel.
func channelErrors(a, b []*image.RGBA) (worst [3]int, mean float64) {
	var sum, n float64
	for f := range a {
		pa, pb := a[f].Pix, b[f].Pix
		for i := 0; i < len(pa); i += 4 {
			for k := range 3 {
				d := int(pa[i+k]) - int(pb[i+k])
				if d < 0 {
					d = -d
				}
				worst[k] = max(worst[k], d)
				sum += float64(d)
				n++
			}
		}
	}
	return worst, sum / n
}

// gifBound is the largest error in any channel that a GIF of a built-in
// game's frames may show. The games draw flat areas, thin edges and, in
// the paddle field, smooth ramps (thousands of colours in 240 frames):
// median cut gives boxes on those ramps a side of up to about 20 levels,
// and a pixel lies within about half a side of its box's mean. Measured
// on the default looks at 240 frames: drive 2 (576 colours, mean 0.02),
// paddle 11 (6292 colours, mean 1.70); the bound leaves room for looks
// that change. (Choosing the box to cut by its squared error instead of
// its longest side halves the mean error but more than doubles the
// largest: 28 on paddle.)
const gifBound = 20

// TestGIFShowsWhatThePolicySaw: on frames of both games, the GIF that
// play writes decodes (image/gif) to the frames the policy saw within
// gifBound levels in every channel, exactly where the sequence has at
// most 256 colours, and the same frames give the same bytes.
func TestGIFShowsWhatThePolicySaw(t *testing.T) {
	for _, name := range []string{"drive", "paddle"} {
		c := playGIF(t, name)
		worst, mean := channelErrors(c.frames, c.decoded)
		t.Logf("%s: %d frames %dx%d, %d colours; largest error per channel %v, mean %.3f levels",
			name, len(c.frames), c.frames[0].Rect.Dx(), c.frames[0].Rect.Dy(), c.colours, worst, mean)
		top := max(worst[0], worst[1], worst[2])
		if c.colours <= frameio.MaxGIFColors && top != 0 {
			t.Errorf("%s: %d colours, yet the GIF is off by %d", name, c.colours, top)
		}
		if top > gifBound {
			t.Errorf("%s: largest channel error %d, bound %d", name, top, gifBound)
		}
		if again := encodeGIF(t, c.frames); !bytes.Equal(c.gif, again) {
			t.Errorf("%s: the same frames gave two different GIFs", name)
		}
	}
}

// TestRefGIFErrorNumPy: NumPy, reading the frames and the decoded GIF
// as .npy, finds the same largest and mean error and the same number of
// colours as the Go measure above (numpy.unique counts the colours).
func TestRefGIFErrorNumPy(t *testing.T) {
	reftest.Need(t, "numpy")
	for _, name := range []string{"drive", "paddle"} {
		c := playGIF(t, name)
		dir := t.TempDir()
		write := func(file string, frames []*image.RGBA) string {
			path := filepath.Join(dir, file)
			f, err := os.Create(path)
			if err != nil {
				t.Fatal(err)
			}
			defer f.Close()
			w, err := frameio.NewNPYWriter(f, frames[0].Rect.Dx(), frames[0].Rect.Dy(), 3, len(frames))
			if err != nil {
				t.Fatal(err)
			}
			for _, m := range frames {
				if err := w.WriteFrame(m); err != nil {
					t.Fatal(err)
				}
			}
			if err := w.Close(); err != nil {
				t.Fatal(err)
			}
			return path
		}
		out := reftest.Run(t, "gif_error_ref.py", write("orig.npy", c.frames), write("gif.npy", c.decoded))
		var ref struct {
			Max             int     `json:"max"`
			MaxPerChannel   [3]int  `json:"max_per_channel"`
			Mean            float64 `json:"mean"`
			ColoursOriginal int     `json:"colours_original"`
			ColoursDecoded  int     `json:"colours_decoded"`
		}
		if err := json.Unmarshal(out, &ref); err != nil {
			t.Fatalf("%s: %v: %s", name, err, out)
		}
		worst, mean := channelErrors(c.frames, c.decoded)
		if worst != ref.MaxPerChannel || max(worst[0], worst[1], worst[2]) != ref.Max {
			t.Errorf("%s: largest error %v, NumPy says %v", name, worst, ref.MaxPerChannel)
		}
		if d := mean - ref.Mean; d > 1e-9 || d < -1e-9 {
			t.Errorf("%s: mean error %v, NumPy says %v", name, mean, ref.Mean)
		}
		if c.colours != ref.ColoursOriginal || ref.ColoursDecoded > frameio.MaxGIFColors {
			t.Errorf("%s: %d colours counted, NumPy counts %d; the GIF holds %d", name, c.colours, ref.ColoursOriginal, ref.ColoursDecoded)
		}
	}
}

// Package gametest holds the checks every game's tests share: golden
// frames compared pixel for pixel with committed PNG files, replay
// determinism, and the variation-string round trip.
package gametest

import (
	"flag"
	"fmt"
	"hash/fnv"
	"image"
	"image/png"
	"io"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/internal/atomicfile"
	"tilebench/internal/seeds"
	"tilebench/vision/stats"
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
		g, err := games.Build(game, games.Setup{Variation: c.Variation})
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

// FrameHash is the FNV-1a hash of a frame's bytes.
func FrameHash(img *image.RGBA) uint64 {
	h := fnv.New64a()
	h.Write(img.Pix)
	return h.Sum64()
}

// RandomAction fills a with a uniformly random action of act: a choice
// index for a discrete space, values within the bounds for a continuous
// one.
func RandomAction(act games.Controls, a []float64, rng *rand.Rand) {
	for i := range a {
		if act.Kind == games.Discrete {
			a[i] = float64(rng.IntN(act.Choices()))
		} else {
			a[i] = act.Low[i] + (act.High[i]-act.Low[i])*rng.Float64()
		}
	}
}

// Trace plays up to steps random actions (from a fixed stream) in the
// named game from seed and returns the hash of every frame and every
// reward.
func Trace(t testing.TB, game, variation string, seed uint64, steps int) (hashes []uint64, rewards []float64) {
	t.Helper()
	g, err := games.Build(game, games.Setup{Variation: variation})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	g.Reset(seed)
	img := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	a := make([]float64, sp.Action.Dim())
	rng := seeds.NewRand(42)
	for k := 0; k < steps; k++ {
		RandomAction(sp.Action, a, rng)
		st, err := g.Step(a)
		if err != nil {
			t.Fatal(err)
		}
		g.Render(img)
		hashes = append(hashes, FrameHash(img))
		rewards = append(rewards, st.Reward)
		if st.Done {
			break
		}
	}
	return hashes, rewards
}

// CheckDeterminism checks that two plays of seed with the same actions
// give identical frames and rewards, from fresh game instances, and that
// other differs from seed in its first frames.
func CheckDeterminism(t *testing.T, game, variation string, seed, other uint64, steps int) {
	t.Helper()
	h1, r1 := Trace(t, game, variation, seed, steps)
	h2, r2 := Trace(t, game, variation, seed, steps)
	h3, _ := Trace(t, game, variation, other, steps)
	if len(h1) != len(h2) {
		t.Fatalf("two plays of seed %d lasted %d and %d steps", seed, len(h1), len(h2))
	}
	for i := range h1 {
		if h1[i] != h2[i] || r1[i] != r2[i] {
			t.Fatalf("step %d differs between two plays of seed %d", i, seed)
		}
	}
	if h1[0] == h3[0] && len(h3) > 1 && h1[1] == h3[1] {
		t.Fatalf("seeds %d and %d give the same frames", seed, other)
	}
}

// CheckVariationString is the body of a variation-parser fuzz target: s
// either parses to a canonical spelling that parses to itself, or is
// refused with an error that starts with the game's name.
func CheckVariationString(t *testing.T, game string, parse func(string) (string, error), s string) {
	t.Helper()
	canon, err := parse(s)
	if err != nil {
		if !strings.HasPrefix(err.Error(), game+": ") {
			t.Fatalf("error %q does not name the game", err)
		}
		return
	}
	again, err := parse(canon)
	if err != nil || again != canon {
		t.Fatalf("canonical %q reparsed as %q, %v", canon, again, err)
	}
}

// BenchStep measures one expert action, one step and one render of g per
// iteration; episode resets are left out of the timing.
func BenchStep(b *testing.B, g games.WithExpert) {
	sp := g.Spec()
	g.Reset(games.HeldOut(0))
	dst := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	act := make([]float64, sp.Action.Dim())
	ex := g.Expert()
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		ex.Act(act)
		st, _ := g.Step(act)
		g.Render(dst)
		if st.Done {
			b.StopTimer()
			g.Reset(games.HeldOut(0))
			b.StartTimer()
		}
	}
}

// BenchFrameCopy is the yardstick for BenchStep: a plain copy of one
// w×h RGBA frame's bytes.
func BenchFrameCopy(b *testing.B, w, h int) {
	src := make([]byte, w*h*4)
	dst := make([]byte, len(src))
	b.ReportAllocs()
	b.SetBytes(int64(len(src)))
	for i := 0; i < b.N; i++ {
		copy(dst, src)
	}
}

// StepTimes times n single steps of g (expert action, step and render,
// a reset on the held-out seed of the step's index when an episode ends)
// and returns their median in nanoseconds; the median of single steps is
// steadier than a benchmark's mean on a busy machine. between, if not
// nil, runs after each step, untimed, with the frame just rendered.
func StepTimes(g games.WithExpert, n int, between func(frame *image.RGBA)) float64 {
	sp := g.Spec()
	g.Reset(games.HeldOut(0))
	img := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	act := make([]float64, sp.Action.Dim())
	ex := g.Expert()
	times := make([]float64, 0, n)
	for i := 0; i < n; i++ {
		s := time.Now()
		ex.Act(act)
		if st, _ := g.Step(act); st.Done {
			g.Reset(games.HeldOut(i))
		}
		g.Render(img)
		times = append(times, float64(time.Since(s)))
		if between != nil {
			between(img)
		}
	}
	return stats.Median(times)
}

package play_test

import (
	"image"
	"image/png"
	"os"
	"path/filepath"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision"
	"tilebench/vision/play"
)

func setup(t *testing.T) (games.Game, *patch.Grid, vision.Policy) {
	t.Helper()
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 7})
	if err != nil {
		t.Fatal(err)
	}
	pol, ok := vision.NewExpertPolicy(g)
	if !ok {
		t.Fatal("paddle ships no expert")
	}
	return g, grid, pol
}

func TestRunSummaryAndDeterminism(t *testing.T) {
	g, grid, pol := setup(t)
	var seen []int
	cfg := play.Config{Game: g, Grid: grid, Policy: pol, Episodes: 3, Seed: games.HeldOutSeedStart,
		OnEpisode: func(i int, e play.Episode) { seen = append(seen, i) }}
	a, err := play.Run(cfg)
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Episodes) != 3 || len(seen) != 3 || seen[2] != 2 {
		t.Fatalf("episodes %d, callbacks %v", len(a.Episodes), seen)
	}
	lo, hi, sum, ends := a.Episodes[0].Return, a.Episodes[0].Return, 0.0, 0
	for i, e := range a.Episodes {
		if e.Seed != games.HeldOutSeedStart+uint64(i) || e.Steps == 0 {
			t.Errorf("episode %d: %+v", i, e)
		}
		lo, hi, sum = min(lo, e.Return), max(hi, e.Return), sum+e.Return
	}
	for _, n := range a.Ends {
		ends += n
	}
	if a.Min != lo || a.Max != hi || a.Mean-sum/3 > 1e-9 || sum/3-a.Mean > 1e-9 || ends != 3 {
		t.Fatalf("summary %+v; want min %v max %v mean %v, 3 ends", a, lo, hi, sum/3)
	}
	b, err := play.Run(cfg)
	if err != nil {
		t.Fatal(err)
	}
	for i := range a.Episodes {
		if a.Episodes[i] != b.Episodes[i] {
			t.Errorf("episode %d: %+v then %+v", i, a.Episodes[i], b.Episodes[i])
		}
	}
}

// The frames kept are what the policy saw: under random:0.5 with black
// fill, exactly round-half-even(0.5·N) cells of every frame are black.
func TestRunKeepsWhatThePolicySaw(t *testing.T) {
	g, grid, pol := setup(t)
	dir := t.TempDir()
	gw := &frameio.GIFWriter{Delay: 5}
	sum, err := play.Run(play.Config{Game: g, Grid: grid, Policy: pol, Episodes: 1, Seed: 7,
		Spec: patch.Spec{Occlude: "random:0.5", Fill: "black"}, GIF: gw, FramesDir: dir})
	if err != nil {
		t.Fatal(err)
	}
	// Unoccluded, the same episode's first frame has far fewer black cells.
	clean := t.TempDir()
	if _, err := play.Run(play.Config{Game: g, Grid: grid, Policy: pol, Episodes: 1, Seed: 7, FramesDir: clean}); err != nil {
		t.Fatal(err)
	}
	if n := blackCellsOf(t, filepath.Join(clean, "episode-001", frameio.FrameName(0)), grid); n >= grid.N()/2 {
		t.Fatalf("the clean frame has %d black cells of %d: the test cannot tell", n, grid.N())
	}
	if gw.Len() == 0 {
		t.Fatal("no GIF frames")
	}
	steps := sum.Episodes[0].Steps
	files, _ := os.ReadDir(filepath.Join(dir, "episode-001"))
	if len(files) != steps {
		t.Fatalf("%d PNG frames for %d steps", len(files), steps)
	}
	for _, k := range []int{0, steps / 2} {
		if n, want := blackCellsOf(t, filepath.Join(dir, "episode-001", frameio.FrameName(k)), grid), (grid.N()+1)/2; n < want {
			t.Errorf("frame %d: %d black cells, want at least %d of %d", k, n, want, grid.N())
		}
	}
}

func blackCellsOf(t *testing.T, path string, g *patch.Grid) int {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	img, err := png.Decode(f)
	if err != nil {
		t.Fatal(err)
	}
	return blackCells(img, g)
}

// blackCells counts the grid cells whose every pixel is black.
func blackCells(img image.Image, g *patch.Grid) int {
	n := 0
	for r := 0; r < g.Rows; r++ {
		for c := 0; c < g.Cols; c++ {
			black := true
			for y := r * g.PatchH; y < (r+1)*g.PatchH && black; y++ {
				for x := c * g.PatchW; x < (c+1)*g.PatchW; x++ {
					if cr, cg, cb, _ := img.At(x, y).RGBA(); cr|cg|cb != 0 {
						black = false
						break
					}
				}
			}
			if black {
				n++
			}
		}
	}
	return n
}

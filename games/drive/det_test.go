package drive

import (
	"image"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
)

// An episode's frames do not depend on what the game played before: the
// world image is restored exactly between episodes, whichever stretches
// of road the last one drew.
func TestResetForgetsLastEpisode(t *testing.T) {
	for _, v := range []string{"", "clutter+grain", "twisty+small"} {
		play := func(g *Game, seed uint64, steps int, act func(k int, a []float64)) []uint64 {
			g.Reset(seed)
			img := image.NewRGBA(image.Rect(0, 0, g.cfg.Width, g.cfg.Height))
			a := make([]float64, 2)
			var hs []uint64
			for k := 0; k < steps; k++ {
				act(k, a)
				if st, _ := g.Step(a); st.Done {
					break
				}
				g.Render(img)
				hs = append(hs, gametest.FrameHash(img))
			}
			return hs
		}
		expert := func(g *Game) func(int, []float64) { return func(_ int, a []float64) { g.Expert().Act(a) } }
		fresh := newGame(t, v)
		want := play(fresh, games.HeldOut(11), 400, expert(fresh))
		g := newGame(t, v)
		// Other episodes first: one driven far round, one wandering off.
		play(g, games.HeldOut(12), 700, expert(g))
		play(g, games.Train(3), 300, func(k int, a []float64) { a[0], a[1] = 0.6, 0.8 })
		got := play(g, games.HeldOut(11), 400, expert(g))
		if len(got) != len(want) {
			t.Fatalf("%q: %d frames after other episodes, %d fresh", v, len(got), len(want))
		}
		for i := range want {
			if got[i] != want[i] {
				t.Fatalf("%q: frame %d differs after other episodes", v, i)
			}
		}
	}
}

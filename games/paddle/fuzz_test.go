package paddle

import (
	"errors"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
)

// FuzzParseVariation: any string either parses to a canonical spelling
// that parses to itself, or is refused with an error naming the game.
func FuzzParseVariation(f *testing.F) {
	for _, s := range []string{"", "default", "lagoon", "drifter+orchid", "short+long", "slot+brisk", "bricks", "+", "analog+analog", "brisk+tinyball+long+lagoon"} {
		f.Add(s)
	}
	parse := func(s string) (string, error) {
		_, canon, err := ParseVariation(s)
		return canon, err
	}
	f.Fuzz(func(t *testing.T, s string) { gametest.CheckVariationString(t, Name, parse, s) })
}

// FuzzStep: any action value either steps both the discrete and the
// analog game or is refused with ErrBadAction; the ball stays between
// the rails and inside the frame's columns (until the last ball is out)
// and keeps a finite speed within the cap.
func FuzzStep(f *testing.F) {
	f.Add(1.0, uint16(100))
	f.Add(2.0, uint16(3000))
	f.Add(math.Inf(1), uint16(1))
	f.Add(-7.5, uint16(500))
	f.Add(0.5, uint16(10))
	dg, err := New(games.Setup{Variation: "drifter"})
	if err != nil {
		f.Fatal(err)
	}
	ag, err := New(games.Setup{Variation: "analog+drifter"})
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, v float64, n uint16) {
		for _, g := range []*Game{dg, ag} {
			g.Reset(uint64(n))
			ok := g.Spec().Action.Check([]float64{v}) == nil
			for k := 0; k < int(n%2500); k++ {
				_, err := g.Step([]float64{v})
				if ok != (err == nil) || (err != nil && !errors.Is(err, games.ErrBadAction)) {
					t.Fatalf("action %v: err %v", v, err)
				}
				b := g.Ball()
				r := g.Config().BallRadius
				if g.done && g.reason == games.Completed {
					break
				}
				if b.X < Left+r-1e-6 || b.X > Width || b.Y < Top+r-1e-6 || b.Y > Bottom-r+1e-6 || math.IsNaN(b.Speed()) || b.Speed() > g.Config().MaxSpeed+1e-9 {
					t.Fatalf("step %d: ball %+v", k, b)
				}
			}
		}
	})
}

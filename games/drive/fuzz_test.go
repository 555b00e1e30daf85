package drive

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
	for _, s := range []string{"", "default", "tarn", "tarn+clutter", "clutter+tarn+clutter", "narrow+broad", "grass", "+", "small+ large", "ochre+grain+narrow+small", "cinder+twisty"} {
		f.Add(s)
	}
	parse := func(s string) (string, error) {
		_, canon, err := ParseVariation(s)
		return canon, err
	}
	f.Fuzz(func(t *testing.T, s string) { gametest.CheckVariationString(t, Name, parse, s) })
}

// FuzzStep: any action either steps the game or, if not finite or of the
// wrong length, is refused with ErrBadAction; the state stays finite.
func FuzzStep(f *testing.F) {
	f.Add(0.0, 1.0, uint8(10))
	f.Add(math.NaN(), 0.0, uint8(1))
	f.Add(1e300, -1e300, uint8(200))
	f.Add(-0.3, 0.7, uint8(255))
	f.Add(0.2, -0.5, uint8(40))
	g, err := New(games.Setup{})
	if err != nil {
		f.Fatal(err)
	}
	f.Fuzz(func(t *testing.T, steer, pedal float64, n uint8) {
		g.Reset(games.HeldOut(int(n % 4)))
		a := []float64{steer, pedal}
		finite := !math.IsNaN(steer+pedal) && !math.IsInf(steer, 0) && !math.IsInf(pedal, 0)
		for k := 0; k < int(n); k++ {
			_, err := g.Step(a)
			if finite != (err == nil) || (err != nil && !errors.Is(err, games.ErrBadAction)) {
				t.Fatalf("action %v: err %v", a, err)
			}
		}
		c := g.Car()
		if math.IsNaN(c.Pos.X+c.Pos.Y+c.Heading+c.Speed) || c.Speed < 0 {
			t.Fatalf("state went bad: %+v", c)
		}
	})
}

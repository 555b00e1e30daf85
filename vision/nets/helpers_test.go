package nets

import (
	"math/rand/v2"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
)

// testGrid returns a grid of w×h frames cut into p×p patches.
func testGrid(t testing.TB, w, h, p int) *patch.Grid {
	t.Helper()
	g, err := patch.NewGrid(patch.GridConfig{Width: w, Height: h, PatchW: p})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

var (
	// contSpace is a three-channel continuous space with unequal bounds
	// (one symmetric, one shifted, one of width 2), so that the affine map
	// from the head's tanh outputs is exercised in every form.
	contSpace = games.Controls{Kind: games.Continuous, Names: []string{"yaw", "reach", "grip"},
		Low: []float64{-1, -0.5, 0}, High: []float64{1, 0.5, 2}}
	discSpace = games.Controls{Kind: games.Discrete, Names: []string{"left", "stay", "right"}}
)

// randomObs returns an observation of the full grid with uniform token
// values drawn from seed.
func randomObs(g *patch.Grid, seed uint64, dim int) *vision.Observation {
	rng := patch.NewRand(seed)
	ts := patch.NewTokenSet(2*g.N(), g.D())
	ts.N = g.N()
	for i := range ts.Data[:ts.N*ts.D] {
		ts.Data[i] = rng.Float32()
	}
	for i := 0; i < ts.N; i++ {
		ts.Pos[i] = g.Cell(i)
	}
	prev := make([]float64, dim)
	for i := range prev {
		prev[i] = rng.Float64()
	}
	return &vision.Observation{Tokens: ts, Grid: g, PrevAction: prev}
}

func mustNew(t testing.TB, cfg Config, g *patch.Grid, s games.Controls, seed uint64) Net {
	t.Helper()
	n, err := New(cfg, g, s, seed)
	if err != nil {
		t.Fatal(err)
	}
	return n
}

func testRand(seed uint64) *rand.Rand { return patch.NewRand(seed) }

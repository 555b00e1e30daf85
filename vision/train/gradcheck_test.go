package train

import (
	"math"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
)

// TestGradientThroughLoss checks, for every family and both action
// kinds, the gradient of the full training loss (net forward, MSE or
// cross-entropy) against central finite differences,
// (L(θ+h) − L(θ−h)) / 2h (the standard check, e.g. Goodfellow, Bengio &
// Courville 2016 §6.5; from memory). Computed in float32, so agreement is
// to a relative 5e-2 on parameters with a clear gradient.
func TestGradientThroughLoss(t *testing.T) {
	grid, err := patch.NewGrid(patch.GridConfig{Width: 12, Height: 12, PatchW: 4})
	if err != nil {
		t.Fatal(err)
	}
	spaces := map[string]games.Controls{
		"continuous": {Kind: games.Continuous, Names: []string{"a", "b"}, Low: []float64{-1, 0}, High: []float64{1, 2}},
		"discrete":   {Kind: games.Discrete, Names: []string{"l", "s", "r"}},
	}
	for _, fam := range append(nets.Families, "attention+context") {
		for sname, space := range spaces {
			cfg := nets.Config{Family: fam, KeySize: 4, Queries: 3, QueryDim: 4, ValueSize: 3, Hidden: 5, TokenHidden: 4, PrevAction: true}
			if fam == "attention+context" {
				// Temporal context: the sample is fed after the frame before it.
				cfg.Family, cfg.Context = nets.Attention, 2
			}
			net, err := nets.New(cfg, grid, space, 7)
			if err != nil {
				t.Fatal(err)
			}
			e := gradEnv(t, grid, space, net)
			ds := newDataset(grid, space.Dim(), space.Dim())
			r := patch.NewRand(3)
			tok := make([]float32, grid.N()*grid.D())
			for i := range tok {
				tok[i] = float32(r.IntN(256)) / 255
			}
			prev := make([]float64, space.Dim())
			label := make([]float64, space.Dim())
			if space.Kind == games.Continuous {
				prev[0], prev[1] = 0.3, 1.2
				label[0], label[1] = -0.4, 1.7
			} else {
				prev[0], label[0] = 2, 1
			}
			ds.add(0, tok, prev, label)
			for i := range tok {
				tok[i] = float32(r.IntN(256)) / 255
			}
			ds.add(1, tok, prev, label)
			loss := func() float64 {
				v, err := e.sampleLoss(ds, 1, 1, 1, false)
				if err != nil {
					t.Fatal(err)
				}
				return v
			}
			net.ZeroGrads()
			if _, err := e.sampleLoss(ds, 1, 1, 1, true); err != nil {
				t.Fatal(err)
			}
			p, g := net.Params(), append([]float32(nil), net.Grads()...)
			checked, bad := 0, 0
			for i := 0; i < len(p); i += 1 + len(p)/150 {
				old := p[i]
				h := float32(1e-2) * float32(math.Max(1, math.Abs(float64(old))))
				p[i] = old + h
				lp := loss()
				p[i] = old - h
				lm := loss()
				p[i] = old
				num := (lp - lm) / float64(2*h)
				if math.Abs(num) < 1e-3 && math.Abs(float64(g[i])) < 1e-3 {
					continue
				}
				checked++
				if math.Abs(num-float64(g[i])) > 5e-2*math.Max(math.Abs(num), 1e-2) {
					bad++
					if bad <= 3 {
						t.Errorf("%s/%s param %d: backprop %.5g, central difference %.5g", fam, sname, i, g[i], num)
					}
				}
			}
			if checked < 5 {
				t.Errorf("%s/%s: only %d parameters had a gradient to check", fam, sname, checked)
			}
		}
	}
}

func gradEnv(t *testing.T, grid *patch.Grid, space games.Controls, net nets.Net) *env {
	t.Helper()
	pipe, err := patch.NewPipeline(grid, patch.Spec{})
	if err != nil {
		t.Fatal(err)
	}
	e := &env{space: space, grid: grid, pipe: pipe, net: net}
	e.clean = patch.NewTokenSet(grid.N(), grid.D())
	e.seen = patch.NewTokenSet(pipe.Capacity(), grid.D())
	e.prev = make([]float64, space.Dim())
	e.out = make([]float32, net.OutputDim())
	e.dOut = make([]float32, net.OutputDim())
	e.obs.Tokens, e.obs.Grid, e.obs.PrevAction = e.seen, grid, e.prev
	return e
}

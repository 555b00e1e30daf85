package nets

import (
	"fmt"
	"slices"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
)

// LayerCost is the cost of one layer of a net for one step.
type LayerCost struct {
	// Name is the layer's tensor prefix ("key", "head.hidden", ...) or a
	// description ("attention", "tanh").
	Name string `json:"name"`
	// Kind is "linear", "tanh", "attention", "meanpool" or "embedding".
	Kind string `json:"kind"`
	// Params is the number of parameters of the layer.
	Params int `json:"params"`
	// FLOPs counts 2·m·k·n for every m×k by k×n matrix product of the
	// layer's forward pass (Golub & Van Loan, §1.1); elementwise work
	// (bias, tanh, exp) is not counted.
	FLOPs int64 `json:"flops"`
	// Activations is the number of float32 values the layer's forward
	// pass produces and keeps for the backward pass.
	Activations int64 `json:"activations"`
}

// Cost is the compute cost of one forward step of a net on a full token
// set of its grid.
type Cost struct {
	Family      string `json:"family"`
	Tokens      int    `json:"tokens"`
	TokenDim    int    `json:"token_dim"`
	Params      int    `json:"params"`
	FLOPs       int64  `json:"flops"`
	Activations int64  `json:"activations"`
	// ActivationBytes is Activations·4 (float32).
	ActivationBytes int64       `json:"activation_bytes"`
	Layers          []LayerCost `json:"layers"`
}

// Estimate returns the cost of cfg's family on grid with space: parameter
// count, FLOPs per step per layer and activation memory, for a full token
// set (grid.N() tokens).
func Estimate(cfg Config, grid *patch.Grid, space games.Controls) (Cost, error) {
	n, err := plan(cfg, grid, space)
	if err != nil {
		return Cost{}, err
	}
	c := n.base()
	cfg = c.cfg
	in := &c.in
	N := int64(grid.N())
	params := func(prefix string) int {
		total := 0
		for _, s := range c.specs {
			if s.name == prefix+".weight" || s.name == prefix+".bias" || s.name == prefix {
				total += s.size
			}
		}
		return total
	}
	var layers []LayerCost
	lin := func(name string, rows, k, n int64) {
		layers = append(layers, LayerCost{Name: name, Kind: "linear", Params: params(name), FLOPs: 2 * rows * k * n, Activations: rows * n})
	}
	th := func(name string, values int64) {
		layers = append(layers, LayerCost{Name: name, Kind: "tanh", Activations: values})
	}
	if in.k > 1 || in.pa > 0 || in.centre {
		layers = append(layers, LayerCost{Name: "input rows", Kind: "input", Activations: N * int64(in.din)})
	}
	if in.centre {
		// Two products: the mean (1×N by N×px) and the rank-1 update
		// that subtracts it (N×1 by 1×px).
		layers = append(layers, LayerCost{Name: "centre", Kind: "centre", FLOPs: 4 * N * int64(in.pixels()), Activations: int64(in.pixels())})
	}
	din, px := int64(in.din), int64(in.pixels())
	H := int64(cfg.Hidden)
	out := int64(c.hd.outDim)
	switch cfg.Family {
	case Attention, PosAttention:
		dk, M, Pq := int64(cfg.KeySize), int64(cfg.Queries), int64(cfg.QueryDim)
		kin := din
		if cfg.KeyHidden > 0 {
			kh := int64(cfg.KeyHidden)
			lin("key.hidden", N, din, kh)
			th("key.hidden tanh", N*kh)
			kin = kh
		}
		lin("key", N, kin, dk)
		if cfg.Family == PosAttention {
			layers = append(layers, LayerCost{Name: "pos.embed", Kind: "embedding", Params: params("pos.embed")})
		}
		dv := px
		if cfg.Value == "linear" {
			dv = int64(cfg.ValueSize)
			lin("value", N, px, dv)
		}
		layers = append(layers, LayerCost{Name: "query.proj", Kind: "linear", Params: params("query.proj"), FLOPs: 2 * M * Pq * dk, Activations: M * dk})
		layers = append(layers, LayerCost{Name: "attention", Kind: "attention", FLOPs: 2*M*dk*N + 2*M*N*dv, Activations: M*N + M*dv})
		th("attention tanh", M*dv)
		lin("head.hidden", 1, M*dv, H)
	case MeanPool:
		th0 := int64(cfg.TokenHidden)
		lin("token", N, din, th0)
		th("token tanh", N*th0)
		layers = append(layers, LayerCost{Name: "mean", Kind: "meanpool", Activations: th0})
		lin("head.hidden", 1, th0, H)
	case MLP:
		lin("head.hidden", 1, N*px+int64(in.pa), H)
	}
	th("head.hidden tanh", H)
	lin("head.out", 1, H, out)
	if c.hd.cont {
		th("action tanh", out)
	}
	cost := Cost{Family: cfg.Family, Tokens: int(N), TokenDim: grid.D(), Params: c.size(), Layers: layers}
	for _, l := range layers {
		cost.FLOPs += l.FLOPs
		cost.Activations += l.Activations
	}
	cost.ActivationBytes = 4 * cost.Activations
	return cost, nil
}

// Bounds of MeasureLatency: a median of 1000 samples is as good as it
// gets on a noisy machine, and 100000 steps of the largest family take
// minutes.
const (
	MaxLatencySamples = 1000
	MaxLatencySteps   = 100000
)

// MeasureLatency runs n.Act on obs samples·steps times (after one warm-up
// sample) and returns the median over the samples of the mean time per
// step. samples is 1..MaxLatencySamples, steps 1..MaxLatencySteps.
func MeasureLatency(n Net, obs *vision.Observation, samples, steps int) (time.Duration, error) {
	if samples < 1 || steps < 1 || samples > MaxLatencySamples || steps > MaxLatencySteps {
		return 0, fmt.Errorf("latency: %d samples of %d steps: want 1..%d samples of 1..%d steps", samples, steps, MaxLatencySamples, MaxLatencySteps)
	}
	action := make([]float64, n.Space().Dim())
	times := make([]time.Duration, 0, samples)
	for s := -1; s < samples; s++ {
		start := time.Now()
		for i := 0; i < steps; i++ {
			if err := n.Act(obs, action); err != nil {
				return 0, fmt.Errorf("latency: %w", err)
			}
		}
		if s >= 0 {
			times = append(times, time.Since(start)/time.Duration(steps))
		}
	}
	slices.Sort(times)
	if len(times)%2 == 1 {
		return times[len(times)/2], nil
	}
	return (times[len(times)/2-1] + times[len(times)/2]) / 2, nil
}

// RandomObservation returns an observation of the full grid with token
// values uniform in [0, 1) drawn from seed and zero previous action, for
// timing and checks.
func RandomObservation(grid *patch.Grid, space games.Controls, seed uint64) *vision.Observation {
	rng := patch.NewRand(seed)
	ts := patch.NewTokenSet(grid.N(), grid.D())
	ts.N = grid.N()
	for i := range ts.Data {
		ts.Data[i] = rng.Float32()
	}
	for i := 0; i < ts.N; i++ {
		ts.Pos[i] = grid.Cell(i)
	}
	return &vision.Observation{Tokens: ts, Grid: grid, PrevAction: make([]float64, space.Dim())}
}

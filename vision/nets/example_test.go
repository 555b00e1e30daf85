package nets_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
)

// A default set-attention policy for 96×96 RGB frames cut into 8×8
// patches, acting on a random observation.
func ExampleNew() {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 96, Height: 96, PatchW: 8})
	space := games.ActionSpace{Kind: games.Continuous, Names: []string{"steer", "gas", "brake"},
		Low: []float64{-1, 0, 0}, High: []float64{1, 1, 1}}
	net, err := nets.New(nets.Config{Family: nets.Attention}, grid, space, 42)
	if err != nil {
		fmt.Println(err)
		return
	}
	obs := nets.RandomObservation(grid, space, 1)
	action := make([]float64, 3)
	if err := net.Act(obs, action); err != nil {
		fmt.Println(err)
		return
	}
	info := net.Info()
	fmt.Println(info.Family, info.Invariant, len(net.Params()), net.OutputDim())
	fmt.Println(action[0] >= -1 && action[0] <= 1)
	// Output:
	// attention true 14755 3
	// true
}

// The cost of the default policy on 96×96 frames at patch 8.
func ExampleEstimate() {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 96, Height: 96, PatchW: 8})
	space := games.ActionSpace{Kind: games.Discrete, Names: []string{"left", "stay", "right"}}
	c, _ := nets.Estimate(nets.Config{}, grid, space)
	fmt.Printf("%d tokens of %d, %d params, %.3f MFLOP\n", c.Tokens, c.TokenDim, c.Params, float64(c.FLOPs)/1e6)
	// Output:
	// 144 tokens of 192, 14755 params, 1.942 MFLOP
}

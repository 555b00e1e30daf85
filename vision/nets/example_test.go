package nets_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
)

// A default set-attention policy for 112×80 RGB frames cut into 8×8
// patches, with a steering and a pedal channel, acting on a random
// observation.
func ExampleNew() {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 112, Height: 80, PatchW: 8})
	space := games.Controls{Kind: games.Continuous, Names: []string{"steering", "pedal"},
		Low: []float64{-1, -1}, High: []float64{1, 1}}
	net, err := nets.New(nets.Config{Family: nets.Attention}, grid, space, 42)
	if err != nil {
		fmt.Println(err)
		return
	}
	obs := nets.RandomObservation(grid, space, 1)
	action := make([]float64, 2)
	if err := net.Act(obs, action); err != nil {
		fmt.Println(err)
		return
	}
	info := net.Info()
	fmt.Println(info.Family, info.Invariant, len(net.Params()), net.OutputDim())
	fmt.Println(action[0] >= -1 && action[0] <= 1)
	// Output:
	// attention true 14722 2
	// true
}

// The cost of the default policy on 112×80 frames at patch 8.
func ExampleEstimate() {
	grid, _ := patch.NewGrid(patch.GridConfig{Width: 112, Height: 80, PatchW: 8})
	space := games.Controls{Kind: games.Discrete, Names: []string{"left", "stay", "right"}}
	c, _ := nets.Estimate(nets.Config{}, grid, space)
	fmt.Printf("%d tokens of %d, %d params, %.3f MFLOP\n", c.Tokens, c.TokenDim, c.Params, float64(c.FLOPs)/1e6)
	// Output:
	// 140 tokens of 192, 14755 params, 1.888 MFLOP
}

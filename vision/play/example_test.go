package play_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/play"
	"tilebench/vision/policies"
)

// Play two paddle episodes with the scripted expert while a third of the
// patches are hidden from the policy (the expert reads the game state, so
// it does not mind).
func ExampleRun() {
	g, _ := games.Build("paddle", games.Setup{})
	grid, _ := policies.GridFor("expert", g.Spec(), "")
	pol, _ := policies.Open("expert", g, grid, policies.Options{})
	sum, err := play.Run(play.Config{Game: g, Grid: grid, Policy: pol, Episodes: 2, Seed: games.HeldOutSeedStart,
		Spec: patch.Spec{Occlude: "random:0.3"}})
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(len(sum.Episodes), sum.Episodes[0].Seed)
	// Output: 2 1000000
}

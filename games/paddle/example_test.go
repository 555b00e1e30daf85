package paddle_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/games/paddle"
)

// Play one held-out episode of the default paddle game with the aiming
// expert.
func ExampleNew() {
	g, err := paddle.New(games.Setup{})
	if err != nil {
		panic(err)
	}
	act := make([]float64, 1)
	g.Reset(games.HeldOut(0))
	var st games.Step
	for !st.Done {
		g.Expert().Act(act)
		if st, err = g.Step(act); err != nil {
			panic(err)
		}
	}
	sp := g.Spec()
	fmt.Println(sp.Width, sp.Height, sp.Action.Names, g.Goals() > g.Lost())
	// Output: 120 80 [up stay down] true
}

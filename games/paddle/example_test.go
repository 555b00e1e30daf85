package paddle_test

import (
	"fmt"

	"tilebench/games"
	"tilebench/games/paddle"
)

// Play one held-out episode of the default paddle game with the
// intercept-predicting expert.
func ExampleNew() {
	g, err := paddle.New(games.Options{})
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
	fmt.Println(g.Spec().Action.Names, st.Reason, g.Returns() > 30, g.Misses())
	// Output: [left stay right] time-up true 0
}

// Where a ball heading down and right first meets the paddle line, after
// bouncing off the right wall: the line is at 75 − 1.6 = 73.4, reached
// after 33.4 steps; the straight path would be at x = 103.4, folded back
// off the wall at 81 − 1.6 = 79.4 to 79.4 − 24 = 55.4.
func ExampleIntercept() {
	x, steps := paddle.Intercept(paddle.Ball{X: 70, Y: 40, VX: 1, VY: 1}, 1.6)
	fmt.Printf("x %.1f after %.1f steps\n", x, steps)
	// Output: x 55.4 after 33.4 steps
}

package drive_test

import (
	"fmt"
	"image"

	"tilebench/games"
	"tilebench/games/drive"
)

// Play one held-out episode with the pure-pursuit expert and render the
// last frame.
func ExampleNew() {
	g, err := drive.New(games.Setup{Variation: "tarn+clutter"})
	if err != nil {
		panic(err)
	}
	sp := g.Spec()
	frame := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	act := make([]float64, sp.Action.Dim())
	g.Reset(games.HeldOut(0))
	var st games.Step
	for !st.Done {
		g.Expert().Act(act)
		if st, err = g.Step(act); err != nil {
			panic(err)
		}
	}
	g.Render(frame)
	fmt.Println(sp.Width, sp.Height, sp.Action.Names, st.Reason, g.OnRoad())
	// Output: 112 80 [steering pedal] completed true
}

// The pure-pursuit curvature of a goal 4 m ahead and 3 m to the left.
func ExamplePurePursuitCurvature() {
	fmt.Printf("%.2f\n", drive.PurePursuitCurvature(drive.Vec{X: 0, Y: 0}, 0, drive.Vec{X: 4, Y: 3}))
	// Output: 0.24
}

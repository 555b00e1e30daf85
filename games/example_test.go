package games_test

import (
	"fmt"
	"image"

	"tilebench/games"
	_ "tilebench/games/all" // registers drive and paddle
)

// Build a registered game by name, with a variation, and draw its first
// frame into a caller-owned image.
func ExampleBuild() {
	g, err := games.Build("paddle", games.Setup{Variation: "orchid+drifter"})
	if err != nil {
		panic(err)
	}
	sp := g.Spec()
	frame := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	g.Reset(games.HeldOut(0))
	g.Render(frame)
	st, err := g.Step([]float64{2}) // down
	fmt.Println(games.Names(), sp.Variation, sp.Width, sp.Height, sp.Action.Kind, sp.Action.Names, st.Done, err)
	// Output: [drive paddle] drifter+orchid 120 80 discrete [up stay down] false <nil>
}

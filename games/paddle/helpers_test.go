package paddle

import (
	"testing"

	"tilebench/games"
)

func newGame(t testing.TB, variation string) *Game {
	t.Helper()
	g, err := New(games.Setup{Variation: variation})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

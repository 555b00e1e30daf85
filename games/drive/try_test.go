package drive

import (
	"testing"
	"tilebench/games"
	"time"
)

func TestTryExpert(t *testing.T) {
	for _, v := range []string{"", "twisty", "narrow"} {
		g := newGame(t, v)
		act := make([]float64, 2)
		var tot float64
		comp := 0
		att := 0
		var steps int
		var lens float64
		t0 := time.Now()
		n := 100
		for i := 0; i < n; i++ {
			g.Reset(games.HeldOut(i))
			att += g.track.Attempts
			lens += g.track.Length
			var st games.Step
			for !st.Done {
				g.Expert().Act(act)
				st, _ = g.Step(act)
				tot += st.Reward
			}
			steps += g.steps
			if st.Reason == games.Completed {
				comp++
			}
		}
		t.Logf("%q mean return %.1f completed %d/%d attempts %.1f len %.0f steps %d  %v", v, tot/float64(n), comp, n, float64(att)/float64(n), lens/float64(n), steps/n, time.Since(t0))
	}
}

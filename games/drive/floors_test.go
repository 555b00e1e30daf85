package drive

import (
	"math"
	"testing"

	"tilebench/games"
	"tilebench/internal/seeds"
)

// measureFloors plays the two baseline policies on held-out seeds
// 0..n−1 of the default game: the zero action (no steering, no pedal)
// and, at every step, each channel drawn uniformly from [−1, 1] (its own
// stream per episode, seeds.DeriveSeed(seed, StreamKey("random-policy"))).
// It returns their mean returns.
func measureFloors(t testing.TB, n int) games.Floors {
	g := newGame(t, "")
	var f games.Floors
	act := make([]float64, 2)
	for i := 0; i < n; i++ {
		seed := games.HeldOut(i)
		for pol := 0; pol < 2; pol++ {
			g.Reset(seed)
			rng := seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("random-policy")))
			var ret float64
			for st := (games.Step{}); !st.Done; {
				act[0], act[1] = 0, 0
				if pol == 1 {
					act[0], act[1] = 2*rng.Float64()-1, 2*rng.Float64()-1
				}
				var err error
				if st, err = g.Step(act); err != nil {
					t.Fatal(err)
				}
				ret += st.Reward
			}
			if pol == 0 {
				f.Idle += ret / float64(n)
			} else {
				f.Random += ret / float64(n)
			}
		}
	}
	return f
}

// The documented floors (Spec.Floors, docs/games.md) are what the two
// baseline policies score today on held-out seeds 0..floorEpisodes−1,
// and the expert is far above both.
func TestFloors(t *testing.T) {
	n := floorEpisodes
	tol := 0.05
	if testing.Short() {
		n, tol = 20, 2 // a fifth of the seeds: only a loose check
	}
	got := measureFloors(t, n)
	t.Logf("measured on %d held-out seeds: idle %.3f, random %.3f", n, got.Idle, got.Random)
	sp := newGame(t, "").Spec().Floors
	if sp != floors {
		t.Fatalf("Spec.Floors %+v, want %+v", sp, floors)
	}
	if math.Abs(got.Idle-floors.Idle) > tol || math.Abs(got.Random-floors.Random) > tol {
		t.Fatalf("floors measured %+v, documented %+v", got, floors)
	}
	if got.Idle != 0 {
		t.Fatalf("a car left standing scored %v, want 0", got.Idle)
	}
	g := newGame(t, "")
	act := make([]float64, 2)
	var expert float64
	for i := 0; i < n; i++ {
		g.Reset(games.HeldOut(i))
		for st := (games.Step{}); !st.Done; {
			g.Expert().Act(act)
			st, _ = g.Step(act)
			expert += st.Reward / float64(n)
		}
	}
	t.Logf("expert %.1f", expert)
	if expert < 20*got.Random {
		t.Fatalf("expert %v not far above the random floor %v", expert, got.Random)
	}
}

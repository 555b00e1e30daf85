package all

import (
	"bytes"
	"errors"
	"image"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
	"tilebench/internal/seeds"
)

// Every registered game and variation keeps the interface's promises:
// a consistent spec, a reset that repeats itself, an expert whose actions
// fit the action space, episodes that end by the step limit, refused
// non-finite actions, and allocation-free steps and renders.
func TestEveryGameKeepsTheContract(t *testing.T) {
	names := games.Names()
	if len(names) < 2 || names[0] != "drive" || names[1] != "paddle" {
		t.Fatalf("registered games %v, want drive and paddle", names)
	}
	for _, name := range names {
		for _, v := range append([]string{""}, games.Variations(name)...) {
			g, err := games.Build(name, games.Setup{Variation: v})
			if err != nil {
				t.Fatalf("%s/%s: %v", name, v, err)
			}
			sp := g.Spec()
			act := sp.Action
			if sp.Name != name || sp.Variation != v || sp.Width <= 0 || sp.Height <= 0 || sp.StepLimit <= 0 || act.Dim() < 1 {
				t.Fatalf("%s/%s: spec %+v", name, v, sp)
			}
			if act.Kind == games.Continuous && (len(act.Low) != act.Dim() || len(act.High) != act.Dim()) {
				t.Fatalf("%s/%s: bounds %v %v for %d dimensions", name, v, act.Low, act.High, act.Dim())
			}
			frame := func(seed uint64) []byte {
				g.Reset(seed)
				img := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
				g.Render(img)
				return img.Pix
			}
			if a, b := frame(games.Train(3)), frame(games.Train(3)); !bytes.Equal(a, b) {
				t.Fatalf("%s/%s: two resets of one seed draw different frames", name, v)
			}
			ex, ok := g.(games.WithExpert)
			if !ok {
				t.Fatalf("%s has no expert", name)
			}
			a := make([]float64, act.Dim())
			rng := seeds.NewRand(1)
			img := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
			steps := 0
			for done := false; !done; steps++ {
				ex.Expert().Act(a)
				if err := act.Check(a); err != nil {
					t.Fatalf("%s/%s: expert action %v: %v", name, v, a, err)
				}
				for i := range a {
					if act.Kind == games.Continuous && (a[i] < act.Low[i] || a[i] > act.High[i]) {
						t.Fatalf("%s/%s: expert action %v outside the bounds", name, v, a)
					}
				}
				if rng.IntN(4) == 0 { // now and then a random action
					gametest.RandomAction(act, a, rng)
				}
				st, err := g.Step(a)
				if err != nil {
					t.Fatal(err)
				}
				done = st.Done
				if done && st.Reason == games.NotEnded {
					t.Fatalf("%s/%s: ended without a reason", name, v)
				}
			}
			if steps > sp.StepLimit {
				t.Fatalf("%s/%s: episode ran %d steps, limit %d", name, v, steps, sp.StepLimit)
			}
			g.Reset(games.HeldOut(0))
			nan := make([]float64, act.Dim())
			nan[0] = math.NaN()
			if _, err := g.Step(nan); !errors.Is(err, games.ErrBadAction) {
				t.Fatalf("%s/%s: NaN action: %v", name, v, err)
			}
			ex.Expert().Act(a)
			g.Step(a)
			allocs := testing.AllocsPerRun(50, func() {
				ex.Expert().Act(a)
				g.Step(a)
				g.Render(img)
			})
			if allocs != 0 {
				t.Fatalf("%s/%s: %v allocations per step", name, v, allocs)
			}
		}
	}
}

// The games are not trivial: a policy of uniformly random actions scores
// far below the scripted expert on the same held-out seeds.
func TestRandomPolicyFallsShort(t *testing.T) {
	for _, name := range games.Names() {
		g, err := games.Build(name, games.Setup{})
		if err != nil {
			t.Fatal(err)
		}
		act := g.Spec().Action
		a := make([]float64, act.Dim())
		play := func(expert bool, seed uint64) float64 {
			g.Reset(seed)
			rng := seeds.NewRand(seed)
			var ret float64
			for {
				if expert {
					g.(games.WithExpert).Expert().Act(a)
				} else {
					gametest.RandomAction(act, a, rng)
				}
				st, err := g.Step(a)
				if err != nil {
					t.Fatal(err)
				}
				ret += st.Reward
				if st.Done {
					return ret
				}
			}
		}
		var ex, rnd float64
		for i := 0; i < 5; i++ {
			ex += play(true, games.HeldOut(i)) / 5
			rnd += play(false, games.HeldOut(i)) / 5
		}
		t.Logf("%s: expert mean return %.1f, random %.1f", name, ex, rnd)
		if rnd > ex/2 {
			t.Errorf("%s: random actions score %.1f, expert %.1f", name, rnd, ex)
		}
	}
}

package vision_test

import (
	"image"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/policies"
)

// sighted wraps a blind policy so that the episode loop renders and
// transforms every frame for it, as it did before Info.Blind.
type sighted struct{ vision.Policy }

func (s sighted) Info() vision.Info {
	in := s.Policy.Info()
	in.Blind = false
	return in
}

// countingGame counts the frames rendered.
type countingGame struct {
	games.Game
	renders int
}

func (c *countingGame) Render(dst *image.RGBA) {
	c.renders++
	c.Game.Render(dst)
}

// blindEpisode builds an episode of game around the policy mk makes
// (on the counting game), at patch 8 with random occlusion and a full
// scramble.
func blindEpisode(t testing.TB, game string, mk func(g games.Game) vision.Policy) (*vision.Episode, *countingGame) {
	t.Helper()
	g, err := games.Build(game, games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	cg := &countingGame{Game: g}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 8})
	if err != nil {
		t.Fatal(err)
	}
	pipe, err := patch.NewPipeline(grid, patch.Spec{Occlude: "random:0.3", Scramble: "full"})
	if err != nil {
		t.Fatal(err)
	}
	e, err := vision.NewEpisode(cg, patch.NewTokenizer(grid), pipe, mk(g))
	if err != nil {
		t.Fatal(err)
	}
	return e, cg
}

func expertOf(t testing.TB) func(games.Game) vision.Policy {
	return func(g games.Game) vision.Policy {
		ex, ok := vision.NewExpertPolicy(g)
		if !ok {
			t.Fatalf("%s ships no expert", g.Spec().Name)
		}
		return ex
	}
}

func baselineOf(t testing.TB, name string) func(games.Game) vision.Policy {
	return func(g games.Game) vision.Policy {
		p, ok := policies.NewBaseline(name, g.Spec())
		if !ok {
			t.Fatalf("no baseline %q", name)
		}
		return p
	}
}

// A blind policy (the experts, the idle and random baselines) plays the
// same episodes whether or not the loop renders frames for it, and the
// loop renders none for it unless a hook asks for them.
func TestBlindPoliciesSkipFrames(t *testing.T) {
	for _, game := range []string{"drive", "paddle"} {
		for name, mk := range map[string]func(games.Game) vision.Policy{
			"expert": expertOf(t), "idle": baselineOf(t, policies.Idle), "random": baselineOf(t, policies.Random),
		} {
			t.Run(game+"/"+name, func(t *testing.T) {
				blind, bg := blindEpisode(t, game, mk)
				seeing, sg := blindEpisode(t, game, func(g games.Game) vision.Policy { return sighted{mk(g)} })
				if !blind.Policy.Info().Blind {
					t.Fatalf("%s on %s is not blind", name, game)
				}
				for i := 0; i < 3; i++ {
					a, err := blind.Run(games.HeldOut(i), uint64(10+i), nil)
					if err != nil {
						t.Fatal(err)
					}
					b, err := seeing.Run(games.HeldOut(i), uint64(10+i), nil)
					if err != nil {
						t.Fatal(err)
					}
					if a.Return != b.Return || a.Steps != b.Steps || a.Reason != b.Reason {
						t.Fatalf("episode %d: blind %+v, rendered %+v", i, a, b)
					}
					if bg.renders != 0 || sg.renders < b.Steps {
						t.Fatalf("episode %d: %d frames rendered blind, %d rendered for %d steps", i, bg.renders, sg.renders, b.Steps)
					}
				}
				// A hook still gets every frame.
				steps := 0
				res, err := blind.Run(games.HeldOut(0), 10, func(int, *image.RGBA, *vision.Observation, *patch.FrameRecord, []float64) { steps++ })
				if err != nil {
					t.Fatal(err)
				}
				if steps != res.Steps || bg.renders != res.Steps {
					t.Fatalf("with a hook: %d hook calls, %d renders, %d steps", steps, bg.renders, res.Steps)
				}
			})
		}
	}
}

// BenchmarkEpisodeDriveExpert plays held-out drive episodes with the
// scripted expert, blind (no frames) and sighted (rendered, tokenized
// and transformed as for a network, the loop's cost before Info.Blind),
// as a study's baseline episodes are played.
func BenchmarkEpisodeDriveExpert(b *testing.B) {
	for _, c := range []struct {
		name string
		wrap func(vision.Policy) vision.Policy
	}{{"blind", func(p vision.Policy) vision.Policy { return p }}, {"sighted", func(p vision.Policy) vision.Policy { return sighted{p} }}} {
		b.Run(c.name, func(b *testing.B) {
			e, _ := blindEpisode(b, "drive", func(g games.Game) vision.Policy { return c.wrap(expertOf(b)(g)) })
			benchEpisodes(b, e)
		})
	}
}

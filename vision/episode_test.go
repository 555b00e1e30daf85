package vision_test

import (
	"errors"
	"image"
	"math"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/patch"
	"tilebench/vision"
)

// newPaddleEpisode builds an episode of the default paddle game with a
// patch-10 identity pipeline (or the given spec) around pol; pol nil means
// the game's expert.
func newPaddleEpisode(t testing.TB, spec patch.Spec, pol func(g games.Game) vision.Policy) *vision.Episode {
	t.Helper()
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 10})
	if err != nil {
		t.Fatal(err)
	}
	pipe, err := patch.NewPipeline(grid, spec)
	if err != nil {
		t.Fatal(err)
	}
	var p vision.Policy
	if pol == nil {
		ex, ok := vision.NewExpertPolicy(g)
		if !ok {
			t.Fatal("paddle ships no expert")
		}
		p = ex
	} else {
		p = pol(g)
	}
	e, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, p)
	if err != nil {
		t.Fatal(err)
	}
	return e
}

// recorder is a policy that plays "stay" and remembers what it was told.
type recorder struct {
	ends     int
	endRet   float64
	endSteps int
	tokensN  int
	nan      bool
}

func (r *recorder) Info() vision.Info { return vision.Info{Family: "test"} }
func (r *recorder) Reset(uint64)      {}
func (r *recorder) Act(obs *vision.Observation, a []float64) error {
	r.tokensN = obs.Tokens.N
	a[0] = 1 // stay
	if r.nan {
		a[0] = math.NaN()
	}
	return nil
}
func (r *recorder) End(ret float64, steps int) error {
	r.ends++
	r.endRet, r.endSteps = ret, steps
	return nil
}

func TestEpisodeIsDeterministic(t *testing.T) {
	e := newPaddleEpisode(t, patch.Spec{Scramble: "full", Occlude: "random:0.3"}, nil)
	a, err := e.Run(games.HeldOut(3), 11, nil)
	if err != nil {
		t.Fatal(err)
	}
	b, err := e.Run(games.HeldOut(3), 11, nil)
	if err != nil {
		t.Fatal(err)
	}
	if a.Return != b.Return || a.Steps != b.Steps || a.Reason != b.Reason {
		t.Fatalf("same seeds gave %+v then %+v", a, b)
	}
	if a.Steps == 0 || a.Reason == games.NotEnded {
		t.Fatalf("episode did not run to an end: %+v", a)
	}
}

func TestEpisodeTellsPolicyTheEnd(t *testing.T) {
	rec := &recorder{}
	e := newPaddleEpisode(t, patch.Spec{Occlude: "random:0.5", Fill: "drop"}, func(games.Game) vision.Policy { return rec })
	res, err := e.Run(games.HeldOut(0), 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	if rec.ends != 1 || rec.endRet != res.Return || rec.endSteps != res.Steps {
		t.Fatalf("End called %d times with (%v, %d); episode returned %v in %d steps", rec.ends, rec.endRet, rec.endSteps, res.Return, res.Steps)
	}
	// 120x80 at patch 10 is 96 cells; dropping half leaves 48.
	if rec.tokensN != 48 {
		t.Fatalf("policy saw %d tokens, want 48 after dropping half of 96", rec.tokensN)
	}
}

func TestEpisodeRefusesNaNAction(t *testing.T) {
	rec := &recorder{nan: true}
	e := newPaddleEpisode(t, patch.Spec{}, func(games.Game) vision.Policy { return rec })
	_, err := e.Run(games.HeldOut(0), 1, nil)
	if !errors.Is(err, games.ErrBadAction) {
		t.Fatalf("err = %v, want one wrapping games.ErrBadAction", err)
	}
}

func TestEpisodeHookSeesEveryStep(t *testing.T) {
	e := newPaddleEpisode(t, patch.Spec{Scramble: "full"}, nil)
	steps := 0
	res, err := e.Run(games.HeldOut(1), 2, func(tt int, raw *image.RGBA, obs *vision.Observation, rec *patch.FrameRecord, _ []float64) {
		if tt != steps || obs.Frame == nil || rec == nil || len(rec.Perm) != obs.Tokens.N {
			t.Fatalf("hook at step %d (want %d): frame %v, record %v", tt, steps, obs.Frame != nil, rec != nil)
		}
		steps++
	})
	if err != nil {
		t.Fatal(err)
	}
	if steps != res.Steps {
		t.Fatalf("hook ran %d times for %d steps", steps, res.Steps)
	}
}

func BenchmarkEpisodePaddleExpert(b *testing.B) {
	// Sighted, so that the loop renders and transforms every frame.
	e := newPaddleEpisode(b, patch.Spec{Scramble: "full", Occlude: "random:0.25"}, func(g games.Game) vision.Policy {
		ex, _ := vision.NewExpertPolicy(g)
		return sighted{ex}
	})
	benchEpisodes(b, e)
}

// benchEpisodes plays e on held-out seeds for b's loop and reports the
// steps per second.
func benchEpisodes(b *testing.B, e *vision.Episode) {
	b.ReportAllocs()
	steps := 0
	for i := 0; b.Loop(); i++ {
		res, err := e.Run(games.HeldOut(i%50), uint64(i), nil)
		if err != nil {
			b.Fatal(err)
		}
		steps += res.Steps
	}
	b.ReportMetric(float64(steps)/b.Elapsed().Seconds(), "steps/s")
}

// The episode loop corrupts each frame before it is cut: with a shift of
// the frame, the frame the policy sees is the raw frame moved, and the
// record holds the offset.
func TestEpisodeCorruptsFrames(t *testing.T) {
	e := newPaddleEpisode(t, patch.Spec{Corrupt: "shift:7:0:wrap"}, nil)
	checked := 0
	_, err := e.Run(games.HeldOut(2), 3, func(tt int, raw *image.RGBA, obs *vision.Observation, rec *patch.FrameRecord, _ []float64) {
		if tt%20 != 0 {
			return
		}
		if rec.Offset != [2]int{7, 0} {
			t.Fatalf("step %d: offset %v", tt, rec.Offset)
		}
		w, h := raw.Rect.Dx(), raw.Rect.Dy()
		moved := 0
		for y := 0; y < h; y++ {
			for x := 0; x < w; x++ {
				got := obs.Frame.RGBAAt(x, y)
				want := raw.RGBAAt((x-7+w)%w, y)
				if got != want {
					t.Fatalf("step %d: seen pixel (%d,%d) = %v, raw pixel %d to its left %v", tt, x, y, got, 7, want)
				}
				if got != raw.RGBAAt(x, y) {
					moved++
				}
			}
		}
		if moved == 0 {
			t.Fatalf("step %d: the seen frame equals the raw one", tt)
		}
		checked++
	})
	if err != nil || checked == 0 {
		t.Fatal(err, checked)
	}
}

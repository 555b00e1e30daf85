package paddle

import (
	"errors"
	"image"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
	"tilebench/internal/seeds"
)

// imageFold is the method of images written out independently of the
// game's code: a point moving freely on the line, seen in a mirror box
// [lo, hi], is at lo + the triangle wave of its distance from lo
// (elementary optics, from memory).
func imageFold(x, lo, hi float64) float64 {
	w := hi - lo
	u := (x - lo) / (2 * w)
	frac := u - math.Floor(u) // in [0,1)
	return lo + w*(1-math.Abs(2*frac-1))
}

// insideClosed reports whether a ball centre lies in the closed box the
// tests use: between the rails, right of the far wall, inside the track.
func insideClosed(b Ball, r float64) bool {
	const eps = 1e-6
	return b.Y >= Top+r-eps && b.Y <= Bottom-r+eps && b.X >= Left+r-eps &&
		math.Hypot(b.X-TrackCX, b.Y-TrackCY) <= TrackR-r+eps
}

// Law of reflection (angle in = angle out, speed kept, normal component
// reversed, tangential kept) at every bounce of many random shots inside
// the closed box, where the far wall has no gate and the whole track is a
// mirror whose normal at a point is the radius through it; the ball never
// leaves the box.
func TestReflectionManyShots(t *testing.T) {
	g := newGame(t, "")
	g.closed = true
	rng := seeds.NewRand(7)
	r := g.cfg.BallRadius
	bounces, track := 0, 0
	for shot := 0; shot < 3000; shot++ {
		var b Ball
		for {
			b = Ball{X: Left + r + (Width-Left-2*r)*rng.Float64(), Y: Top + r + (Bottom-Top-2*r)*rng.Float64()}
			if insideClosed(b, r) {
				break
			}
		}
		a := 2 * math.Pi * rng.Float64()
		s := 0.3 + 3.5*rng.Float64()
		b.VX, b.VY = s*math.Cos(a), s*math.Sin(a)
		g.ball = b
		steps := 1 + rng.IntN(300)
		for k := 0; k < steps; k++ {
			g.nEvents = 0
			g.advance(1)
			for _, ev := range g.Events() {
				bounces++
				var n [2]float64 // unit normal
				switch ev.Kind {
				case HitWall:
					n = [2]float64{1, 0}
				case HitTop, HitBottom:
					n = [2]float64{0, 1}
				case HitTrack:
					track++
					d := math.Hypot(ev.Before.X-TrackCX, ev.Before.Y-TrackCY)
					if math.Abs(d-(TrackR-r)) > 1e-9 {
						t.Fatalf("shot %d: track bounce at distance %v, want %v", shot, d, TrackR-r)
					}
					n = [2]float64{(ev.Before.X - TrackCX) / d, (ev.Before.Y - TrackCY) / d}
				default:
					t.Fatalf("shot %d: unexpected event %v", shot, ev.Kind)
				}
				bi, af := ev.Before, ev.After
				sIn, sOut := bi.Speed(), af.Speed()
				if math.Abs(sIn-sOut) > 1e-12*sIn {
					t.Fatalf("shot %d: speed %v → %v", shot, sIn, sOut)
				}
				vin, vout := bi.VX*n[0]+bi.VY*n[1], af.VX*n[0]+af.VY*n[1]
				if math.Abs(math.Acos(math.Min(1, math.Abs(vin)/sIn))-math.Acos(math.Min(1, math.Abs(vout)/sOut))) > 1e-7 {
					t.Fatalf("shot %d: angle of incidence ≠ angle of reflection: %+v → %+v", shot, bi, af)
				}
				if vin*vout > 0 {
					t.Fatalf("shot %d: normal component did not reverse: %+v → %+v", shot, bi, af)
				}
				if math.Abs((bi.VX*n[1]-bi.VY*n[0])-(af.VX*n[1]-af.VY*n[0])) > 1e-12*sIn {
					t.Fatalf("shot %d: tangential component changed: %+v → %+v", shot, bi, af)
				}
			}
			if !insideClosed(g.ball, r) {
				t.Fatalf("shot %d step %d: ball %+v left the closed box", shot, k, g.ball)
			}
		}
	}
	if bounces < 10000 || track < 2000 {
		t.Fatalf("only %d bounces (%d on the track) checked", bounces, track)
	}
}

// Between the rails alone (shots too slow sideways to reach the far wall
// or the track), the ball's height after many bounces is the straight
// path folded by the method of images.
func TestRailsFoldLikeImages(t *testing.T) {
	g := newGame(t, "")
	g.closed = true
	rng := seeds.NewRand(9)
	r := g.cfg.BallRadius
	for shot := 0; shot < 500; shot++ {
		x0, y0 := 40+10*rng.Float64(), Top+r+(Bottom-Top-2*r)*rng.Float64()
		vx, vy := 0.05*(2*rng.Float64()-1), 0.5+3*rng.Float64()
		if rng.IntN(2) == 0 {
			vy = -vy
		}
		g.ball = Ball{X: x0, Y: y0, VX: vx, VY: vy}
		steps := 1 + rng.IntN(200)
		for k := 0; k < steps; k++ {
			g.nEvents = 0
			g.advance(1)
		}
		T := float64(steps)
		if want := imageFold(y0+vy*T, Top+r, Bottom-r); math.Abs(g.ball.Y-want) > 1e-6 || math.Abs(g.ball.X-(x0+vx*T)) > 1e-9 {
			t.Fatalf("shot %d after %d steps: ball at (%v,%v), method of images says (%v,%v)", shot, steps, g.ball.X, g.ball.Y, x0+vx*T, want)
		}
	}
}

// trackTime agrees with the root of |d + v·t|² − ρ² found by bisection
// (a method that shares nothing with the closed form; common practice),
// and the point it gives lies on the circle.
func TestTrackTimeMatchesBisection(t *testing.T) {
	rng := seeds.NewRand(13)
	rho := TrackR - 1.6
	f := func(b Ball, t float64) float64 {
		dx, dy := b.X+b.VX*t-TrackCX, b.Y+b.VY*t-TrackCY
		return dx*dx + dy*dy - rho*rho
	}
	for shot := 0; shot < 3000; shot++ {
		rad, ang := rho*math.Sqrt(rng.Float64()), 2*math.Pi*rng.Float64()
		va, s := 2*math.Pi*rng.Float64(), 0.1+5*rng.Float64()
		b := Ball{X: TrackCX + rad*math.Cos(ang), Y: TrackCY + rad*math.Sin(ang), VX: s * math.Cos(va), VY: s * math.Sin(va)}
		got := trackTime(b, rho)
		lo, hi := 0.0, 1.0
		for f(b, hi) < 0 {
			hi *= 2
		}
		for i := 0; i < 200; i++ {
			mid := (lo + hi) / 2
			if f(b, mid) < 0 {
				lo = mid
			} else {
				hi = mid
			}
		}
		if math.Abs(got-lo) > 1e-9*math.Max(1, lo) {
			t.Fatalf("shot %d: trackTime %v, bisection %v", shot, got, lo)
		}
	}
	// Outside and moving away: never.
	if tt := trackTime(Ball{X: TrackCX + rho + 1, Y: TrackCY, VX: 1}, rho); !math.IsInf(tt, 1) {
		t.Fatalf("a ball outside moving away meets the track at %v", tt)
	}
}

// hitAt places the ball just inside the track at bearing th, heading
// straight out at speed s, so that it meets the track a quarter into the
// next step.
func hitAt(g *Game, th, s float64) {
	rho := TrackR - g.cfg.BallRadius
	d := rho - 0.25*s
	g.ball = Ball{X: TrackCX + d*math.Cos(th), Y: TrackCY + d*math.Sin(th), VX: s * math.Cos(th), VY: s * math.Sin(th)}
}

// The ball leaves the paddle along the track's inward normal turned by
// MaxAngle times the hit's offset from the paddle's centre (in units of
// the paddle's reach), faster by SpeedUp and never past MaxSpeed; the
// k-th return of one ball scores k·RallyPoints up to RallyCap.
func TestPaddleReturn(t *testing.T) {
	g := newGame(t, "")
	r, hw := g.cfg.BallRadius, g.cfg.PaddleHalf
	reach := (hw + r) / TrackR
	for _, phi := range []float64{-0.4, 0, 0.3} {
		for _, off := range []float64{-0.98, -0.5, 0, 0.25, 0.9} {
			g.Reset(1)
			g.phi = phi
			th := phi + off*reach
			hitAt(g, th, 2)
			g.nEvents = 0
			if got := g.advance(1); got != RallyPoints {
				t.Fatalf("phi %v offset %v: reward %v, want %v", phi, off, got, RallyPoints)
			}
			ev := g.Events()[0]
			if ev.Kind != HitPaddle || math.Abs(ev.At-0.25) > 1e-12 {
				t.Fatalf("phi %v offset %v: event %+v, want a return a quarter into the step", phi, off, ev)
			}
			a := math.Atan2(ev.After.VY, ev.After.VX)
			if d := remainder(a - (th + math.Pi + off*g.cfg.MaxAngle)); math.Abs(d) > 1e-9 {
				t.Errorf("phi %v offset %v: left at %v rad, %v off the rule", phi, off, a, d)
			}
			if s := ev.After.Speed(); math.Abs(s-2*g.cfg.SpeedUp) > 1e-12 {
				t.Errorf("phi %v offset %v: speed %v, want %v", phi, off, s, 2*g.cfg.SpeedUp)
			}
		}
	}
	// A rally: rewards 0.25, 0.5, 0.75, 1, 1, 1 and the speed capped.
	g.Reset(1)
	for k := 1; k <= 6; k++ {
		g.phi = 0
		hitAt(g, 0, g.cfg.MaxSpeed)
		g.nEvents = 0
		want := RallyPoints * float64(min(k, RallyCap))
		if got := g.advance(1); got != want {
			t.Fatalf("return %d scored %v, want %v", k, got, want)
		}
		if s := g.ball.Speed(); math.Abs(s-g.cfg.MaxSpeed) > 1e-12 {
			t.Fatalf("speed %v past the cap %v", s, g.cfg.MaxSpeed)
		}
	}
	// Just beyond the paddle's reach the ball passes.
	g.Reset(1)
	g.phi = 0
	hitAt(g, reach+1e-6, 2)
	g.nEvents = 0
	if got := g.advance(1); got != 0 || g.Events()[0].Kind != Passed || g.loose == 0 {
		t.Fatalf("a ball beyond the reach: reward %v, events %+v", got, g.Events())
	}
}

// A ball that reaches the far wall within the gate (its whole width
// inside the opening) scores GoalPoints and the next ball is served; one
// that reaches it just outside bounces.
func TestGoalAndWall(t *testing.T) {
	g := newGame(t, "")
	r := g.cfg.BallRadius
	for _, dy := range []float64{0, 5, g.cfg.GateHalf - r - 0.01, -(g.cfg.GateHalf - r - 0.01), g.cfg.GateHalf - r + 0.3} {
		g.Reset(4)
		g.cfg.GateSpeed = 0
		g.gateV = 0
		y := g.gateY + dy
		g.ball = Ball{X: Left + r + 1, Y: y, VX: -2, VY: 0}
		served := g.served
		st, err := g.Step([]float64{1})
		if err != nil {
			t.Fatal(err)
		}
		goal := math.Abs(dy) <= g.cfg.GateHalf-r
		if goal != (st.Reward == GoalPoints) || goal != (g.goals == 1) || goal != (g.served == served+1) {
			t.Errorf("offset %v from the gate's centre: reward %v, goals %d, served %d→%d", dy, st.Reward, g.goals, served, g.served)
		}
		if !goal && (g.Events()[0].Kind != HitWall || g.ball.VX != 2) {
			t.Errorf("offset %v: no bounce off the wall: %+v", dy, g.Events())
		}
		g.cfg = DefaultConfig()
	}
}

// A paddle that never moves loses balls: each scores LostPoints, and the
// episode completes when every served ball has been scored or lost; the
// return is the sum of its parts.
func TestIdleEpisodeCompletes(t *testing.T) {
	g := newGame(t, "")
	g.Reset(games.HeldOut(3))
	stay := []float64{1}
	var ret, rally float64
	k := 0 // returns of the ball in play
	var st games.Step
	var err error
	for !st.Done {
		if st, err = g.Step(stay); err != nil {
			t.Fatal(err)
		}
		ret += st.Reward
		for _, ev := range g.Events() {
			switch ev.Kind {
			case HitPaddle:
				k++
				rally += RallyPoints * float64(min(k, RallyCap))
			case Goal, Passed:
				k = 0
			}
		}
	}
	if st.Reason != games.Completed || g.goals+g.lost != g.cfg.Balls || g.served != g.cfg.Balls {
		t.Fatalf("ended %v with %d goals, %d lost, %d served; want completed after %d balls", st.Reason, g.goals, g.lost, g.served, g.cfg.Balls)
	}
	if want := GoalPoints*float64(g.goals) + LostPoints*float64(g.lost) + rally; math.Abs(ret-want) > 1e-9 {
		t.Fatalf("return %v, want %v from %d goals, %d lost, %d returns", ret, want, g.goals, g.lost, g.returns)
	}
	// After the end, Step changes nothing.
	b := g.ball
	if st, err := g.Step(stay); err != nil || !st.Done || st.Reward != 0 || g.ball != b {
		t.Fatalf("step after the end: %+v, %v", st, err)
	}
}

// meanReturn plays n held-out episodes with act and returns the mean
// return and the mean counts of goals and lost balls.
func meanReturn(t testing.TB, g *Game, n int, act func(ep int, dst []float64)) (ret, goals, lost float64) {
	t.Helper()
	a := make([]float64, g.spec.Action.Dim())
	for i := 0; i < n; i++ {
		g.Reset(games.HeldOut(i))
		for st := (games.Step{}); !st.Done; {
			act(i, a)
			var err error
			if st, err = g.Step(a); err != nil {
				t.Fatal(err)
			}
			ret += st.Reward
		}
		goals += float64(g.goals)
		lost += float64(g.lost)
	}
	return ret / float64(n), goals / float64(n), lost / float64(n)
}

// The expert loses under one ball in an episode and scores far above the
// idle and random floors; aiming earns clearly more than keeping level.
func TestExpertFarAboveFloors(t *testing.T) {
	for _, v := range []string{"", "analog", "drifter", "orchid"} {
		g := newGame(t, v)
		ex, goals, lost := meanReturn(t, g, 100, func(_ int, a []float64) { g.Expert().Act(a) })
		g.expert.Aim = true
		aim, _, _ := meanReturn(t, g, 100, func(_ int, a []float64) { g.Expert().Act(a) })
		g.expert.Aim = false
		t.Logf("variation %q: expert %.2f (%.2f goals, %.2f lost per episode), aiming %.2f", v, ex, goals, lost, aim)
		if lost > 1 || ex < 25 || aim < 1.2*ex {
			t.Errorf("variation %q: expert %.2f with %.2f lost, aiming %.2f", v, ex, lost, aim)
		}
		if f := DefaultFloors; ex < f.Random+45 || ex < f.Idle+45 {
			t.Errorf("variation %q: expert %.2f not far above the floors %+v", v, ex, f)
		}
	}
}

// randomPolicy returns the uniformly random baseline: one PCG stream per
// episode, derived from the episode's seed.
func randomPolicy(g *Game) func(int, []float64) {
	var rng = seeds.NewRand(0)
	last := -1
	return func(ep int, a []float64) {
		if ep != last {
			rng = seeds.NewRand(seeds.DeriveSeed(games.HeldOut(ep), seeds.StreamKey("random-policy")))
			last = ep
		}
		gametest.RandomAction(g.spec.Action, a, rng)
	}
}

// DefaultFloors are what the idle and random policies score on held-out
// episodes 0–199 (docs/games.md).
func TestFloors(t *testing.T) {
	g := newGame(t, "")
	idle, _, _ := meanReturn(t, g, 200, func(_ int, a []float64) { a[0] = 1 })
	random, _, _ := meanReturn(t, g, 200, randomPolicy(g))
	t.Logf("idle %.4f, random %.4f over held-out episodes 0–199", idle, random)
	if math.Abs(idle-DefaultFloors.Idle) > 0.01 || math.Abs(random-DefaultFloors.Random) > 0.01 {
		t.Fatalf("measured floors idle %.4f, random %.4f; DefaultFloors says %+v", idle, random, DefaultFloors)
	}
	if g.Spec().Floors != DefaultFloors || newGame(t, "drifter").Spec().Floors != (games.Floors{}) {
		t.Fatal("Spec.Floors: the default game carries DefaultFloors, other variations none")
	}
}

// Aiming works: with the gate still, a ball returned at the offset
// AimOffset gives (unclamped, and where the paddle can reach) goes out
// through the gate on its next crossing.
func TestAimOffsetFindsTheGate(t *testing.T) {
	g := newGame(t, "")
	rng := seeds.NewRand(17)
	r := g.cfg.BallRadius
	reach := (g.cfg.PaddleHalf + r) / TrackR
	checked := 0
	for shot := 0; shot < 500; shot++ {
		g.Reset(uint64(shot))
		g.gateV = 0
		th := -0.55 + 1.1*rng.Float64()
		off := g.AimOffset(th)
		g.phi = th - off*reach
		if math.Abs(off) >= 0.85 || math.Abs(g.phi) > g.phiMax {
			continue // clamped, or beyond where the paddle can go
		}
		hitAt(g, th, 2)
		goal := false
		for k := 0; k < 200 && !goal; k++ {
			st, err := g.Step([]float64{1})
			if err != nil {
				t.Fatal(err)
			}
			goal = st.Reward == GoalPoints
			if g.goals == 0 && (g.lost > 0 || g.returns > 1) {
				break
			}
			for _, ev := range g.Events() {
				if ev.Kind == HitWall {
					k = 1000
				}
			}
		}
		checked++
		if !goal {
			t.Errorf("shot %d: bearing %v, offset %v: no goal", shot, th, off)
		}
	}
	if checked < 300 {
		t.Fatalf("only %d shots aimed", checked)
	}
}

// The same seed and actions give the same frames and rewards; another
// seed gives other frames.
func TestDeterminism(t *testing.T) {
	gametest.CheckDeterminism(t, Name, "drifter", 5, 6, 600)
}

func TestBadActions(t *testing.T) {
	for _, v := range []string{"", "analog"} {
		g := newGame(t, v)
		g.Reset(2)
		img := image.NewRGBA(image.Rect(0, 0, Width, Height))
		g.Render(img)
		before, b := gametest.FrameHash(img), g.ball
		bad := [][]float64{{math.NaN()}, {math.Inf(1)}, {math.Inf(-1)}, {}, {1, 1}}
		if v == "" {
			bad = append(bad, []float64{3}, []float64{-1}, []float64{0.5})
		}
		for _, a := range bad {
			if _, err := g.Step(a); !errors.Is(err, games.ErrBadAction) {
				t.Errorf("%q: action %v: err %v, want ErrBadAction", v, a, err)
			}
		}
		g.Render(img)
		if gametest.FrameHash(img) != before || g.ball != b || g.steps != 0 {
			t.Errorf("%q: a refused action changed the state", v)
		}
	}
	// Analog values outside [−1,1] are clamped, not refused.
	g := newGame(t, "analog")
	g.Reset(2)
	g.Step([]float64{40})
	phi := g.phi
	g.Reset(2)
	g.Step([]float64{1})
	if g.phi != phi || phi <= 0 {
		t.Errorf("velocity 40 moved the paddle to %v, velocity 1 to %v", phi, g.phi)
	}
}

// The paddle stays on the track between the rails, whatever it is told.
func TestPaddleStaysBetweenRails(t *testing.T) {
	for _, v := range []string{"", "long"} {
		g := newGame(t, v)
		for _, a := range []float64{0, 2} {
			g.Reset(1)
			for k := 0; k < 200; k++ {
				g.Step([]float64{a})
			}
			end := g.phi + math.Copysign(g.cfg.PaddleHalf/TrackR, g.phi)
			if y := TrackCY + (TrackR+PaddleH)*math.Sin(end); y < Top-1e-9 || y > Bottom+1e-9 || math.Abs(g.phi) != g.phiMax {
				t.Errorf("%q action %v: paddle at %v rad, outer corner at y %v", v, a, g.phi, y)
			}
		}
	}
}

func TestVariations(t *testing.T) {
	_, canon, err := ParseVariation("drifter+orchid+drifter")
	if err != nil || canon != "drifter+orchid" {
		t.Fatalf("canonical %q, %v", canon, err)
	}
	for _, bad := range []string{"bricks", "lagoon+orchid", "short+long", "+", "drifter+"} {
		if _, _, err := ParseVariation(bad); err == nil {
			t.Errorf("variation %q accepted", bad)
		}
	}
	for _, v := range Variations.Names() {
		if Variations.Doc(v) == "" {
			t.Errorf("variation %s has no description", v)
		}
		g := newGame(t, v)
		if g.Spec().Variation != v {
			t.Errorf("spec variation %q, want %q", g.Spec().Variation, v)
		}
	}
	for _, o := range []games.Setup{{Width: 84}, {Height: 84}, {Width: 80, Height: 120}} {
		if _, err := New(o); err == nil {
			t.Errorf("a %dx%d paddle frame was accepted", o.Width, o.Height)
		}
	}
	if g, err := New(games.Setup{Width: Width, Height: Height}); err != nil || g.Spec().Width != 120 || g.Spec().Height != 80 {
		t.Errorf("the game's own size: %v", err)
	}
	bad := DefaultConfig()
	bad.GateHalf = 1
	if _, err := NewConfig(bad, ""); err == nil {
		t.Error("a 2 px gate was accepted")
	}
	if g, err := games.Build(Name, games.Setup{Variation: "analog"}); err != nil || g.Spec().Action.Kind != games.Continuous {
		t.Errorf("registry: %v", err)
	}
}

// Golden frames: fixed seeds and variations, rendered after a fixed run
// of the expert, match the committed PNGs pixel for pixel. Regenerate
// with go test ./games/paddle -run Golden -update (and look at them).
func TestGoldenFrames(t *testing.T) {
	gametest.CheckCases(t, Name, []gametest.Case{
		{Variation: "", Seed: games.HeldOut(0), Steps: 0},
		{Variation: "", Seed: games.HeldOut(1), Steps: 140},
		{Variation: "lagoon+drifter", Seed: games.HeldOut(2), Steps: 90},
		{Variation: "orchid+bigball+long", Seed: games.HeldOut(3), Steps: 60},
		{Variation: "slot", Seed: games.HeldOut(4), Steps: 75},
	})
}

// Reset draws from the stream seeds.NewRand gives for the episode's
// "serve" key, and allocates nothing.
func TestResetStreamAndAllocs(t *testing.T) {
	g := newGame(t, "")
	for _, seed := range []uint64{0, 7, games.HeldOut(3)} {
		g.Reset(seed)
		want := seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("serve")))
		// Reset's draws: the gate, its direction, the post, its
		// direction, the serve's x, y and tilt.
		want.Float64()
		want.IntN(2)
		want.Float64()
		want.IntN(2)
		want.Float64()
		want.Float64()
		want.Float64()
		if got, w := g.rng.Uint64(), want.Uint64(); got != w {
			t.Fatalf("seed %d: stream gives %x, seeds.NewRand %x", seed, got, w)
		}
	}
	if n := testing.AllocsPerRun(200, func() { g.Reset(9) }); n != 0 {
		t.Fatalf("Reset: %v allocations", n)
	}
}

// Step plus Render allocate nothing.
func TestStepRenderAllocs(t *testing.T) {
	g := newGame(t, "drifter")
	img := image.NewRGBA(image.Rect(0, 0, Width, Height))
	act := []float64{1}
	n := testing.AllocsPerRun(500, func() {
		g.Expert().Act(act)
		if st, _ := g.Step(act); st.Done {
			g.Reset(1)
		}
		g.Render(img)
	})
	if n != 0 {
		t.Fatalf("%v allocations per step", n)
	}
}

// Bounces off the drifting post keep the speed and reverse one velocity
// component (law of reflection on an axis-aligned face), and the ball
// never ends a step inside the post.
func TestObstacleBounces(t *testing.T) {
	g := newGame(t, "drifter")
	g.closed = true
	rng := seeds.NewRand(23)
	r := g.cfg.BallRadius
	hits := 0
	for shot := 0; shot < 300; shot++ {
		g.Reset(uint64(shot))
		a := 2 * math.Pi * rng.Float64()
		s := 0.5 + 3*rng.Float64()
		g.ball = Ball{X: Left + r + 30*rng.Float64(), Y: Top + r + (Bottom-Top-2*r)*rng.Float64(), VX: s * math.Cos(a), VY: s * math.Sin(a)}
		for k := 0; k < 200; k++ {
			g.moveObstacle()
			g.nEvents = 0
			g.advance(1)
			for _, ev := range g.Events() {
				if ev.Kind != HitObstacle {
					continue
				}
				hits++
				bi, af := ev.Before, ev.After
				if math.Abs(bi.Speed()-af.Speed()) > 1e-12 {
					t.Fatalf("shot %d: speed %v → %v off the post", shot, bi.Speed(), af.Speed())
				}
				flippedX := af.VX == -bi.VX && af.VY == bi.VY
				flippedY := af.VY == -bi.VY && af.VX == bi.VX
				if !flippedX && !flippedY {
					t.Fatalf("shot %d: %+v → %+v is no reflection off a face", shot, bi, af)
				}
			}
			b := g.ball
			if b.X > obstacleX-r+1e-6 && b.X < obstacleX+obstacleW+r-1e-6 && b.Y > g.obsY-r+1e-6 && b.Y < g.obsY+obstacleL+r-1e-6 {
				t.Fatalf("shot %d step %d: ball %+v inside the post at y %v", shot, k, b, g.obsY)
			}
		}
	}
	if hits < 100 {
		t.Fatalf("only %d post bounces", hits)
	}
}

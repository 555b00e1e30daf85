package drive

import (
	"errors"
	"image"
	"math"
	"testing"

	"tilebench/games"
	"tilebench/games/internal/gametest"
	"tilebench/internal/seeds"
)

// Steady turning at low speed traces a circle of radius R = L / tan δ
// about the rear axle (Rajamani, Vehicle Dynamics and Control, §2.2,
// kinematic bicycle model with the reference point on the rear axle).
func TestTurningRadius(t *testing.T) {
	for _, steer := range []float64{0.15, 0.4, 0.7, 1, -0.6} {
		c := NewCar(CarParams{Rolling: -1, Drag: -1})
		c.Speed = 2 // low speed: no slip, grip cap far away
		delta := steer * c.P.MaxSteer
		R := c.P.Wheelbase / math.Tan(delta)
		// Centre of the circle: R to the left of the rear axle.
		cx, cy := c.Pos.X-R*math.Sin(c.Heading), c.Pos.Y+R*math.Cos(c.Heading)
		worst := 0.0
		var driven float64
		for k := 0; k < 2000; k++ {
			driven += c.Advance(steer, 0, DT)
			d := math.Hypot(c.Pos.X-cx, c.Pos.Y-cy)
			worst = math.Max(worst, math.Abs(d-math.Abs(R)))
		}
		if worst > 1e-9*math.Abs(R) {
			t.Errorf("steer %v: distance from the turn centre strays %v m from R = L/tan δ = %v m", steer, worst, R)
		}
		// Heading change = distance / R.
		want := wrapAngle(driven / R)
		if d := math.Abs(wrapAngle(c.Heading - want)); d > 1e-9 {
			t.Errorf("steer %v: heading %v, want %v", steer, c.Heading, want)
		}
	}
	// At speed, the grip cap widens the circle to v²/Grip.
	c := NewCar(CarParams{Rolling: -1, Drag: -1})
	c.Speed = 20
	c.Advance(1, 0, DT)
	kappa := c.Heading / (20 * DT)
	if want := c.P.Grip / 400; math.Abs(kappa-want) > 1e-12 {
		t.Errorf("curvature at 20 m/s full lock %v, want Grip/v² = %v", kappa, want)
	}
}

// Straight-line stopping distance under constant deceleration a is
// v²/(2a) (elementary kinematics).
func TestStoppingDistance(t *testing.T) {
	for _, v0 := range []float64{3, 11.3, 20, 27.7} {
		c := NewCar(CarParams{Rolling: -1, Drag: -1})
		c.Speed = v0
		var d float64
		for k := 0; k < 10000 && c.Speed > 0; k++ {
			d += c.Advance(0, -1, DT)
		}
		want := v0 * v0 / (2 * c.P.MaxBrake)
		if math.Abs(d-want) > 1e-9 || math.Abs(c.Pos.X-want) > 1e-9 {
			t.Errorf("v0 %v: stopped after %v m (x %v), want v²/2a = %v", v0, d, c.Pos.X, want)
		}
		// With rolling resistance the deceleration is a + c_rr·g.
		c = NewCar(CarParams{Drag: -1})
		c.Speed = v0
		d = 0
		for k := 0; k < 10000 && c.Speed > 0; k++ {
			d += c.Advance(0, -1, DT)
		}
		want = v0 * v0 / (2 * (c.P.MaxBrake + c.P.Rolling))
		if math.Abs(d-want) > 1e-9 {
			t.Errorf("v0 %v with rolling: %v m, want %v", v0, d, want)
		}
	}
	// No reverse: braking at rest stays at rest.
	c := NewCar(CarParams{})
	if d := c.Advance(0, -1, DT); d != 0 || c.Speed != 0 {
		t.Errorf("braking at rest moved %v m, speed %v", d, c.Speed)
	}
}

// Pure pursuit on a worked geometry (Coulter 1992, CMU-RI-TR-92-01): a
// goal 4 m ahead and 3 m to the left is l = 5 m away with lateral offset
// x = 3 m, so κ = 2x/l² = 2 sin α / l = 0.24 1/m; the arc of that
// curvature tangent to the heading passes through the goal.
func TestPurePursuitWorkedExample(t *testing.T) {
	if k := PurePursuitCurvature(Vec{0, 0}, 0, Vec{4, 3}); math.Abs(k-0.24) > 1e-12 {
		t.Fatalf("κ = %v, want 0.24", k)
	}
	if k := PurePursuitCurvature(Vec{0, 0}, 0, Vec{4, -3}); math.Abs(k+0.24) > 1e-12 {
		t.Fatalf("goal on the right: κ = %v, want −0.24", k)
	}
	// The same geometry moved and turned gives the same curvature.
	rng := seeds.NewRand(3)
	for i := 0; i < 100; i++ {
		p := Vec{100 * (rng.Float64() - 0.5), 100 * (rng.Float64() - 0.5)}
		h := 2 * math.Pi * rng.Float64()
		gx := p.X + 4*math.Cos(h) - 3*math.Sin(h)
		gy := p.Y + 4*math.Sin(h) + 3*math.Cos(h)
		k := PurePursuitCurvature(p, h, Vec{gx, gy})
		if math.Abs(k-0.24) > 1e-12 {
			t.Fatalf("moved and turned: κ = %v, want 0.24", k)
		}
		// Circle of radius 1/κ centred to the left of p passes the goal.
		cx, cy := p.X-math.Sin(h)/k, p.Y+math.Cos(h)/k
		if d := math.Hypot(gx-cx, gy-cy); math.Abs(d-1/k) > 1e-9 {
			t.Fatalf("goal %v m from the arc's centre, radius %v", d, 1/k)
		}
	}
}

// Every circuit closes: walking its pieces from the start line comes
// back to the start line facing the same way one full turn later, and
// the samples lie on the pieces (each sample's distance from the
// previous one is the arc's chord, 2R·sin(Δs/2R), or Δs on a straight).
func TestCircuitsClose(t *testing.T) {
	for _, v := range []string{"", "twisty", "narrow"} {
		cfg, _, err := ParseVariation(v)
		if err != nil {
			t.Fatal(err)
		}
		tr := &Track{}
		for i := 0; i < 40; i++ {
			if err := tr.Generate(games.HeldOut(i), cfg.Track); err != nil {
				t.Fatal(err)
			}
			end, h := tr.End()
			if d := end.sub(tr.Start).norm(); d > 1e-9 {
				t.Fatalf("%q seed %d: the circuit ends %v m from its start", v, i, d)
			}
			if d := math.Abs(h - tr.StartHeading - 2*math.Pi); d > 1e-9 {
				t.Fatalf("%q seed %d: the heading turns %v rad round the lap, want 2π", v, i, h-tr.StartHeading)
			}
			var sum float64
			for _, pc := range tr.Pieces {
				sum += pc.Length
			}
			if math.Abs(sum-tr.Length) > 1e-9 {
				t.Fatalf("%q seed %d: length %v, pieces add to %v", v, i, tr.Length, sum)
			}
			for j := 1; j < len(tr.Pts); j++ {
				ds := tr.S[j] - tr.S[j-1]
				want := ds
				if k := tr.Kappa[j-1]; k != 0 && tr.Kappa[j] == k {
					want = 2 / math.Abs(k) * math.Sin(ds*math.Abs(k)/2)
				} else if tr.Kappa[j] != tr.Kappa[j-1] {
					continue // a join between pieces: part straight, part bend
				}
				if got := tr.Pts[j].sub(tr.Pts[j-1]).norm(); math.Abs(got-want) > 1e-9 {
					t.Fatalf("%q seed %d sample %d: %v m from the last, want %v", v, i, j, got, want)
				}
			}
		}
	}
}

// Generated circuits meet the acceptance rules (no bend tighter than
// MinRadius, no crossing, the box within Extent, the width within its
// swing, non-neighbouring road kept apart), and the crossing test catches
// a figure of eight.
func TestCircuitRules(t *testing.T) {
	for _, v := range []string{"", "twisty", "broad"} {
		c, _, _ := ParseVariation(v)
		cfg := c.Track.withDefaults()
		tr := &Track{}
		for i := 0; i < 50; i++ {
			if err := tr.Generate(games.Train(i), cfg); err != nil {
				t.Fatal(err)
			}
			straights, bends := 0, 0
			for _, pc := range tr.Pieces {
				if pc.Kappa == 0 {
					straights++
					if pc.Length < cfg.MinStraight-1e-9 {
						t.Fatalf("%q seed %d: straight of %v m", v, i, pc.Length)
					}
				} else {
					bends++
				}
			}
			if bends < cfg.Bends || bends > cfg.Bends+1 || straights != bends {
				t.Fatalf("%q seed %d: %d bends, %d straights", v, i, bends, straights)
			}
			for j, k := range tr.Kappa {
				if math.Abs(k) > 1/cfg.MinRadius+1e-12 {
					t.Fatalf("%q seed %d sample %d: radius %v m < %v m", v, i, j, 1/math.Abs(k), cfg.MinRadius)
				}
				if h := tr.Half[j]; h < cfg.Width/2*(1-cfg.WidthSwing)-1e-9 || h > cfg.Width/2*(1+cfg.WidthSwing)+1e-9 {
					t.Fatalf("%q seed %d sample %d: half width %v m", v, i, j, h)
				}
			}
			if tr.SelfIntersects() {
				t.Fatalf("%q seed %d: circuit crosses itself", v, i)
			}
			if tr.Max.X-tr.Min.X > cfg.Extent || tr.Max.Y-tr.Min.Y > cfg.Extent {
				t.Fatalf("%q seed %d: box %v..%v", v, i, tr.Min, tr.Max)
			}
			// Full-resolution clearance: samples further apart along the
			// road than the check's exclusion keep 1.6 widths apart.
			w := cfg.Width * (1 + cfg.WidthSwing)
			along := 3*w + math.Pi/2*(1.6*w+clearStep)
			for a := 0; a < len(tr.Pts); a += 2 {
				for b := a + 1; b < len(tr.Pts); b += 2 {
					ds := tr.S[b] - tr.S[a]
					if ds < along || tr.Length-ds < along {
						continue
					}
					if d := tr.Pts[a].sub(tr.Pts[b]).norm(); d < 1.6*w {
						t.Fatalf("%q seed %d: samples %d and %d only %v m apart", v, i, a, b, d)
					}
				}
			}
		}
		car := NewCar(CarParams{})
		if minR := car.P.Wheelbase / math.Tan(car.P.MaxSteer); cfg.MinRadius < 2*minR {
			t.Fatalf("MinRadius %v leaves no margin over the car's %v m turning radius", cfg.MinRadius, minR)
		}
	}
	eight := &Track{}
	for k := 0; k < 64; k++ {
		a := 2 * math.Pi * float64(k) / 64
		eight.Pts = append(eight.Pts, Vec{60 * math.Sin(a), 30 * math.Sin(2*a)})
	}
	eight.measure()
	if !eight.SelfIntersects() {
		t.Error("figure of eight not caught")
	}
	if eight.clear(9) {
		t.Error("figure of eight passed the clearance check")
	}
	circle := &Track{}
	for k := 0; k < 64; k++ {
		a := 2 * math.Pi * float64(k) / 64
		circle.Pts = append(circle.Pts, Vec{50 * math.Cos(a), 50 * math.Sin(a)})
	}
	circle.measure()
	if circle.SelfIntersects() {
		t.Error("circle reported as crossing itself")
	}
	if !circle.clear(9) {
		t.Error("circle failed the clearance check")
	}
	// Bad configurations are refused with an error.
	for _, bad := range []TrackConfig{{Bends: 2}, {Bends: 6, Reverse: 3}, {MinRadius: 50, MaxRadius: 20}, {WidthSwing: 0.6}, {Spacing: 9}} {
		if _, err := NewTrack(1, bad); err == nil {
			t.Errorf("config %+v accepted", bad)
		}
	}
}

// Render agrees with a plain per-pixel float mapping from frame to world
// (the fixed-point stepping may round differently only on a few pixel
// boundaries).
func TestRenderMatchesPlainMapping(t *testing.T) {
	for _, v := range []string{"", "small", "large+grain"} {
		g := newGame(t, v)
		g.Reset(games.HeldOut(4))
		act := make([]float64, 2)
		for k := 0; k < 120; k++ {
			g.Expert().Act(act)
			g.Step(act)
		}
		W, H := g.cfg.Width, g.cfg.Height
		img := image.NewRGBA(image.Rect(0, 0, W, H))
		g.Render(img)
		c := g.car.Centre()
		hx, hy := math.Cos(g.car.Heading), math.Sin(g.car.Heading)
		wd, vw := g.world, g.frameView
		sprite := map[int]bool{}
		for _, s := range g.sprite {
			sprite[s.off] = true
		}
		diff := 0
		for row := 0; row < H; row++ {
			for col := 0; col < W; col++ {
				if sprite[row*4*W+4*col] {
					continue
				}
				fwd := (vw.ay - float64(row) - 0.5) / vw.ppm
				left := (vw.ax - float64(col) - 0.5) / vw.ppm
				x := c.X + fwd*hx - left*hy
				y := c.Y + fwd*hy + left*hx
				u := int(math.Floor((x - wd.minX) * wd.ppm))
				vv := int(math.Floor((wd.maxY - y) * wd.ppm))
				want := wd.border
				if u >= 0 && vv >= 0 && u < wd.w && vv < wd.h {
					want = wd.pix[vv*wd.w+u]
				}
				o := row*img.Stride + 4*col
				got := uint32(img.Pix[o]) | uint32(img.Pix[o+1])<<8 | uint32(img.Pix[o+2])<<16 | uint32(img.Pix[o+3])<<24
				if got != want {
					diff++
				}
			}
		}
		if diff > W*H/100 {
			t.Errorf("variation %q: %d of %d pixels differ from the plain mapping", v, diff, W*H)
		}
	}
}

// The same seed and actions give identical frames and rewards.
func TestDeterminism(t *testing.T) {
	gametest.CheckDeterminism(t, Name, "clutter+grain", games.HeldOut(8), games.HeldOut(9), 300)
	gametest.CheckDeterminism(t, Name, "", games.HeldOut(1), games.HeldOut(2), 300)
}

// Rewards: each step's reward is its signed centreline progress in
// metres, less OffRoadPenalty per second with the car's centre off the
// road; the expert's lap ends Completed once the lap's distance is done.
func TestLapReward(t *testing.T) {
	g := newGame(t, "")
	g.Reset(games.HeldOut(2))
	act := make([]float64, 2)
	var ret float64
	var st games.Step
	off := 0
	for !st.Done {
		g.Expert().Act(act)
		var err error
		if st, err = g.Step(act); err != nil {
			t.Fatal(err)
		}
		if !g.OnRoad() {
			off++
		}
		ret += st.Reward
	}
	if st.Reason != games.Completed {
		t.Fatalf("ended %v", st.Reason)
	}
	want := g.progress - OffRoadPenalty*DT*float64(off)
	if math.Abs(ret-want) > 1e-6 {
		t.Fatalf("return %v, want %v", ret, want)
	}
	if g.progress < g.track.Length || g.progress > g.track.Length+2 {
		t.Fatalf("lap ended at progress %v m of %v m", g.progress, g.track.Length)
	}
	if float64(g.steps)*DT > TimeLimit {
		t.Fatalf("lap took %d steps, over the %v s limit", g.steps, TimeLimit)
	}
	// Backing away is not possible (no reverse), but progress is signed:
	// a car turned round and driven loses what it drives.
	g.Reset(games.HeldOut(2))
	g.car.Heading += math.Pi
	g.car.Pos = g.car.Pos.add(unit(g.car.Heading).scale(-g.car.P.Wheelbase))
	ret = 0
	for k := 0; k < 40; k++ {
		st, _ = g.Step([]float64{0, 1})
		ret += st.Reward
	}
	if ret >= 0 || math.Abs(ret-g.progress) > 1e-9 || g.progress > -1 {
		t.Fatalf("driving backwards round the lap: return %v, progress %v", ret, g.progress)
	}
}

// The episode fails once the car's centre has spent more than
// OffRoadAllowance seconds in all off the road, and a car left standing
// runs out of time at TimeLimit with nothing earned.
func TestOffRoadFailsAndTimeUp(t *testing.T) {
	g := newGame(t, "")
	g.Reset(games.HeldOut(1))
	var st games.Step
	off := 0
	var ret float64
	for k := 0; k < MaxSteps && !st.Done; k++ {
		st, _ = g.Step([]float64{-1, 0.5})
		if !g.OnRoad() {
			off++
		}
		ret += st.Reward
	}
	if st.Reason != games.Failed || off != offRoadSteps+1 {
		t.Fatalf("ended %v after %d steps off the road", st.Reason, off)
	}
	if want := g.progress - OffRoadPenalty*DT*float64(off); math.Abs(ret-want) > 1e-9 {
		t.Fatalf("return %v, want progress less the penalty %v", ret, want)
	}
	g.Reset(games.HeldOut(1))
	n := 0
	for st = (games.Step{}); !st.Done; n++ {
		st, _ = g.Step([]float64{0, 0})
		if st.Reward != 0 {
			t.Fatalf("standing still earned %v", st.Reward)
		}
	}
	if st.Reason != games.TimeUp || n != MaxSteps || float64(MaxSteps)*DT != TimeLimit {
		t.Fatalf("standing still ended %v after %d steps", st.Reason, n)
	}
}

func TestBadActionsAndClamping(t *testing.T) {
	g := newGame(t, "")
	img := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
	g.Render(img)
	before, car := gametest.FrameHash(img), g.car
	for _, a := range [][]float64{{math.NaN(), 0}, {0, math.Inf(1)}, {math.Inf(-1), 0}, {0}, {}, {0, 0, 0}} {
		if _, err := g.Step(a); !errors.Is(err, games.ErrBadAction) {
			t.Errorf("action %v: err %v, want ErrBadAction", a, err)
		}
	}
	g.Render(img)
	if gametest.FrameHash(img) != before || g.car != car || g.steps != 0 {
		t.Fatal("a refused action changed the state")
	}
	// Out-of-bounds values are clamped: (5, 3) drives as (1, 1) and
	// (−4, −9) as (−1, −1).
	a, b := newGame(t, ""), newGame(t, "")
	for k := 0; k < 30; k++ {
		a.Step([]float64{5, 3})
		b.Step([]float64{1, 1})
	}
	for k := 0; k < 10; k++ {
		a.Step([]float64{-4, -9})
		b.Step([]float64{-1, -1})
	}
	if a.car != b.car {
		t.Fatalf("clamped car %+v, bounded car %+v", a.car, b.car)
	}
}

func TestVariationsAndOptions(t *testing.T) {
	for _, v := range Variations.Names() {
		g := newGame(t, v)
		if g.Spec().Variation != v || Variations.Doc(v) == "" {
			t.Errorf("variation %s: spec %q", v, g.Spec().Variation)
		}
	}
	for _, bad := range []string{"grass", "tarn+ochre", "narrow+broad", "small+large", "clutter+"} {
		if _, err := New(games.Setup{Variation: bad}); err == nil {
			t.Errorf("variation %q accepted", bad)
		}
	}
	g, err := New(games.Setup{Width: 80, Height: 60})
	if err != nil || g.Spec().Width != 80 || g.Spec().Height != 60 {
		t.Fatalf("80x60: %v", err)
	}
	img := image.NewRGBA(image.Rect(0, 0, 80, 60))
	g.Render(img)
	for _, o := range []games.Setup{{Width: 4}, {Height: 300}, {Width: 2000, Height: 2000}} {
		if _, err := New(o); err == nil {
			t.Errorf("frame %dx%d accepted", o.Width, o.Height)
		}
	}
	if gg, err := games.Build(Name, games.Setup{Variation: "broad"}); err != nil || gg.Spec().Name != Name {
		t.Errorf("registry: %v", err)
	}
}

// Golden frames: fixed seeds and variations after a fixed run of the
// expert match the committed PNGs pixel for pixel. Regenerate with
// go test ./games/drive -run Golden -update, and look at them.
func TestGoldenFrames(t *testing.T) {
	gametest.CheckCases(t, Name, []gametest.Case{
		{Variation: "", Seed: games.HeldOut(0), Steps: 0},
		{Variation: "", Seed: games.HeldOut(1), Steps: 200},
		{Variation: "tarn+clutter", Seed: games.HeldOut(2), Steps: 150},
		{Variation: "ochre+grain", Seed: games.HeldOut(3), Steps: 90},
		{Variation: "cinder+narrow", Seed: games.HeldOut(4), Steps: 300},
		{Variation: "broad+small", Seed: games.HeldOut(5), Steps: 60},
		{Variation: "large", Seed: games.Train(6), Steps: 120},
		{Variation: "twisty", Seed: games.HeldOut(7), Steps: 250},
	})
}

// bodyOnRoad reports whether all four corners of the car's body are on
// the road.
func bodyOnRoad(g *Game) bool {
	c := g.car
	ctr := c.Centre()
	h := Vec{math.Cos(c.Heading), math.Sin(c.Heading)}
	n := Vec{-h.Y, h.X}
	for _, k := range [4][2]float64{{1, 1}, {1, -1}, {-1, 1}, {-1, -1}} {
		p := ctr.add(h.scale(k[0] * c.P.Length / 2)).add(n.scale(k[1] * c.P.Width / 2))
		if i, _, lat := g.track.Project(p, g.idx, 24); math.Abs(lat) > g.track.Half[i] {
			return false
		}
	}
	return true
}

// The expert drives a full lap without any corner of the car leaving the
// road on at least 95% of 200 held-out circuits, and on a tenth as many
// with the narrow and broad roads and the harder circuits (where running
// out of time on the road counts as clean). The full run takes a few
// seconds; -short checks a tenth of each.
func TestExpertLaps(t *testing.T) {
	n := 200
	if testing.Short() {
		n = 20
	}
	for _, v := range []string{"", "narrow", "broad", "twisty"} {
		n := n
		if v != "" {
			n /= 10 // the road-width variations: a smaller sample
		}
		g := newGame(t, v)
		act := make([]float64, 2)
		clean := 0
		var steps int
		for i := 0; i < n; i++ {
			g.Reset(games.HeldOut(i))
			offRoad := false
			var st games.Step
			for !st.Done {
				g.Expert().Act(act)
				var err error
				if st, err = g.Step(act); err != nil {
					t.Fatal(err)
				}
				offRoad = offRoad || !bodyOnRoad(g)
			}
			steps += g.steps
			// The harder circuits are often longer than the time limit
			// allows: there a clean run is one that never leaves the road.
			finished := st.Reason == games.Completed || (v == "twisty" && st.Reason == games.TimeUp)
			if finished && !offRoad {
				clean++
			} else {
				t.Logf("seed %d: %v after %d steps, left the road: %v", games.HeldOut(i), st.Reason, g.steps, offRoad)
			}
		}
		t.Logf("variation %q: %d of %d clean laps, mean %d steps", v, clean, n, steps/n)
		if float64(clean) < 0.95*float64(n) {
			t.Errorf("variation %q: %d of %d clean laps, want ≥ 95%%", v, clean, n)
		}
	}
}

// Step plus Render allocate nothing.
func TestStepRenderAllocs(t *testing.T) {
	g := newGame(t, "clutter")
	img := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
	act := make([]float64, 2)
	g.Expert().Act(act) // the speed plan is built once per circuit
	n := testing.AllocsPerRun(300, func() {
		g.Expert().Act(act)
		g.Step(act)
		g.Render(img)
	})
	if n != 0 {
		t.Fatalf("%v allocations per step", n)
	}
}

// The stamped road agrees with the plain geometry: with every stretch
// drawn, a world pixel well inside the road (by its distance from the
// whole centreline, searched exhaustively) has the road's colour, one
// inside the edge band the edge colour, and one well beyond the shoulder
// bare ground.
func TestWorldRoadMatchesDistance(t *testing.T) {
	for _, v := range []string{"", "twisty+broad"} {
		g := newGame(t, v)
		g.Reset(games.HeldOut(6))
		wd, tr := g.world, g.track
		wd.ensure(image.Rect(0, 0, wd.w, wd.h), tr)
		px := 1 / wd.ppm
		ew := g.cfg.EdgeWidth
		rng := seeds.NewRand(9)
		checked := [3]int{}
		for n := 0; n < 20000; n++ {
			x, y := rng.IntN(wd.w), rng.IntN(wd.h)
			p := Vec{wd.minX + (float64(x)+0.5)*px, wd.maxY - (float64(y)+0.5)*px}
			if p.sub(tr.Start).norm() < tr.Width+3 {
				continue // the start band
			}
			i, _, lat := tr.Project(p, 0, 0)
			e := math.Abs(lat) - tr.Half[i]
			got := wd.pix[y*wd.w+x]
			switch {
			case e < -1.5*px && math.Abs(lat) > seamHalf+1.5*px:
				checked[0]++
				if got != wd.cRoad {
					t.Fatalf("%q: pixel (%d,%d) %.2f m inside the edge is %#x, want road %#x", v, x, y, -e, got, wd.cRoad)
				}
			case e > 0.6*px && e < ew-0.6*px:
				checked[1]++
				if got != wd.cEdge {
					t.Fatalf("%q: pixel (%d,%d) %.2f m into the edge band is %#x, want %#x", v, x, y, e, got, wd.cEdge)
				}
			case e > ew+shoulder+1.5*px:
				checked[2]++
				if got != wd.terrainAt(x, y) {
					t.Fatalf("%q: pixel (%d,%d) %.2f m from the road is %#x, want ground", v, x, y, e, got)
				}
			}
		}
		if checked[0] < 100 || checked[1] < 5 || checked[2] < 1000 {
			t.Fatalf("%q: too few pixels checked: %v", v, checked)
		}
	}
}

// Starting an episode allocates nothing once the game has played one
// (the world image, the circuit and the expert's plan reuse their
// buffers), whichever circuit comes next.
func TestResetAllocs(t *testing.T) {
	for _, v := range []string{"", "twisty+broad"} {
		g := newGame(t, v)
		img := image.NewRGBA(image.Rect(0, 0, DefaultWidth, DefaultHeight))
		act := make([]float64, 2)
		for i := 0; i < 50; i++ { // warm-up: every circuit of the cycle once
			g.Reset(games.HeldOut(i))
			g.Expert().Act(act)
			g.Render(img)
		}
		i := 0
		n := testing.AllocsPerRun(100, func() {
			g.Reset(games.HeldOut(i % 50))
			g.Expert().Act(act)
			g.Render(img)
			i++
		})
		if n != 0 {
			t.Errorf("variation %q: %v allocations per reset and first frame", v, n)
		}
	}
}

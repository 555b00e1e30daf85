package drive

import (
	"errors"
	"image"
	"math"
	"testing"

	"gonum.org/v1/gonum/integrate/quad"

	"tilebench/games"
	"tilebench/games/internal/gametest"
	"tilebench/internal/seeds"
)

func newGame(t testing.TB, variation string) *Game {
	t.Helper()
	g, err := New(games.Options{Variation: variation})
	if err != nil {
		t.Fatal(err)
	}
	return g
}

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
			driven += c.Advance(steer, 0, 0, DT)
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
	c.Advance(1, 0, 0, DT)
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
			d += c.Advance(0, 0, 1, DT)
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
			d += c.Advance(0, 0, 1, DT)
		}
		want = v0 * v0 / (2 * (c.P.MaxBrake + c.P.Rolling))
		if math.Abs(d-want) > 1e-9 {
			t.Errorf("v0 %v with rolling: %v m, want %v", v0, d, want)
		}
	}
	// No reverse: braking at rest stays at rest.
	c := NewCar(CarParams{})
	if d := c.Advance(0, 0, 1, DT); d != 0 || c.Speed != 0 {
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

// The Catmull–Rom spline passes through every control point, with the
// tangent (P[k+1]−P[k−1])/2 there (Catmull & Rom 1974), and is C¹ at the
// joins.
func TestCatmullRomThroughControlPoints(t *testing.T) {
	for i := 0; i < 20; i++ {
		tr, err := NewTrack(games.HeldOut(i), TrackConfig{})
		if err != nil {
			t.Fatal(err)
		}
		n := len(tr.Control)
		for k := 0; k < n; k++ {
			p0, d0, _ := tr.Eval(k, 0)
			p1, d1, _ := tr.Eval(k-1, 1)
			want := tr.Control[k]
			if p0.sub(want).norm() > 1e-9 || p1.sub(want).norm() > 1e-9 {
				t.Fatalf("seed %d point %d: curve at %v / %v, control %v", i, k, p0, p1, want)
			}
			tan := tr.Control[(k+1)%n].sub(tr.Control[(k-1+n)%n]).scale(0.5)
			if d0.sub(tan).norm() > 1e-9 || d1.sub(tan).norm() > 1e-9 {
				t.Fatalf("seed %d point %d: tangent %v / %v, want %v", i, k, d0, d1, tan)
			}
			if tr.Pts[k*tr.per] != want {
				t.Fatalf("seed %d: sample %d is not control point %d", i, k*tr.per, k)
			}
		}
	}
}

// The circuit's length (its polyline) matches the spline's arc length
// ∫|P'(t)|dt by Gauss–Legendre quadrature (gonum/integrate/quad) within
// 0.05%, and is at least the perimeter of the control polygon (a curve
// through the points in order is never shorter than the polygon).
func TestTrackLength(t *testing.T) {
	for i := 0; i < 20; i++ {
		tr, err := NewTrack(games.HeldOut(i), TrackConfig{})
		if err != nil {
			t.Fatal(err)
		}
		var arc, poly float64
		n := len(tr.Control)
		for k := 0; k < n; k++ {
			arc += quad.Fixed(func(u float64) float64 {
				_, d, _ := tr.Eval(k, u)
				return d.norm()
			}, 0, 1, 40, quad.Legendre{}, 0)
			poly += tr.Control[(k+1)%n].sub(tr.Control[k]).norm()
		}
		if rel := math.Abs(tr.Length-arc) / arc; rel > 5e-4 {
			t.Errorf("seed %d: polyline %v m, arc length %v m (rel. error %v)", i, tr.Length, arc, rel)
		}
		if tr.Length < poly {
			t.Errorf("seed %d: circuit %v m shorter than its control polygon %v m", i, tr.Length, poly)
		}
	}
}

// Generated circuits meet the acceptance rules; the self-intersection test
// catches a figure of eight.
func TestCircuitRules(t *testing.T) {
	cfg := TrackConfig{}.withDefaults()
	for i := 0; i < 50; i++ {
		tr, err := NewTrack(games.Train(i), TrackConfig{})
		if err != nil {
			t.Fatal(err)
		}
		for j, k := range tr.Kappa {
			if math.Abs(k) > 1/cfg.MinRadius {
				t.Fatalf("seed %d sample %d: radius %v m < %v m", i, j, 1/math.Abs(k), cfg.MinRadius)
			}
		}
		if tr.SelfIntersects() {
			t.Fatalf("seed %d: circuit crosses itself", i)
		}
		car := NewCar(CarParams{})
		if minR := car.P.Wheelbase / math.Tan(car.P.MaxSteer); cfg.MinRadius < 2*minR {
			t.Fatalf("MinRadius %v leaves no margin over the car's %v m turning radius", cfg.MinRadius, minR)
		}
	}
	var eight []Vec
	for k := 0; k < 16; k++ {
		a := 2 * math.Pi * float64(k) / 16
		eight = append(eight, Vec{60 * math.Sin(a), 30 * math.Sin(2*a)})
	}
	if !buildTrack(eight, 9, 16).SelfIntersects() {
		t.Error("figure of eight not caught")
	}
	var circle []Vec
	for k := 0; k < 12; k++ {
		a := 2 * math.Pi * float64(k) / 12
		circle = append(circle, Vec{50 * math.Cos(a), 50 * math.Sin(a)})
	}
	if buildTrack(circle, 9, 16).SelfIntersects() {
		t.Error("circle reported as crossing itself")
	}
}

// Render agrees with a plain per-pixel float mapping from frame to world
// (the fixed-point stepping may round differently only on a few pixel
// boundaries).
func TestRenderMatchesPlainMapping(t *testing.T) {
	for _, v := range []string{"", "small", "large+grain"} {
		g := newGame(t, v)
		g.Reset(games.HeldOut(4))
		act := make([]float64, 3)
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
}

// Rewards: a lap's centreline progress is worth LapReward; each step
// costs StepCost; the expert's lap ends Completed.
func TestLapReward(t *testing.T) {
	g := newGame(t, "")
	g.Reset(games.HeldOut(2))
	act := make([]float64, 3)
	var ret float64
	var st games.Step
	for !st.Done {
		g.Expert().Act(act)
		var err error
		if st, err = g.Step(act); err != nil {
			t.Fatal(err)
		}
		ret += st.Reward
	}
	if st.Reason != games.Completed {
		t.Fatalf("ended %v", st.Reason)
	}
	want := g.progress*LapReward/g.track.Length - StepCost*float64(g.steps)
	if math.Abs(ret-want) > 1e-6 {
		t.Fatalf("return %v, want %v", ret, want)
	}
	if g.progress < g.track.Length || g.progress > g.track.Length+2 {
		t.Fatalf("lap ended at progress %v m of %v m", g.progress, g.track.Length)
	}
}

// Driving in a tight circle leaves the road; the episode fails once the
// car has been off it for more than OffRoadLimit steps.
func TestOffRoadFails(t *testing.T) {
	g := newGame(t, "")
	g.Reset(games.HeldOut(1))
	var st games.Step
	off := 0
	for k := 0; k < MaxSteps && !st.Done; k++ {
		st, _ = g.Step([]float64{-1, 0.5, 0})
		if !g.OnRoad() {
			off++
		} else {
			off = 0
		}
	}
	if st.Reason != games.Failed || off != OffRoadLimit+1 {
		t.Fatalf("ended %v after %d steps off the road", st.Reason, off)
	}
}

func TestBadActionsAndClamping(t *testing.T) {
	g := newGame(t, "")
	img := image.NewRGBA(image.Rect(0, 0, DefaultSize, DefaultSize))
	g.Render(img)
	before, car := gametest.FrameHash(img), g.car
	for _, a := range [][]float64{{math.NaN(), 0, 0}, {0, math.Inf(1), 0}, {0, 0, math.Inf(-1)}, {0, 1}, {}, {0, 0, 0, 0}} {
		if _, err := g.Step(a); !errors.Is(err, games.ErrBadAction) {
			t.Errorf("action %v: err %v, want ErrBadAction", a, err)
		}
	}
	g.Render(img)
	if gametest.FrameHash(img) != before || g.car != car || g.steps != 0 {
		t.Fatal("a refused action changed the state")
	}
	// Out-of-bounds values are clamped: (5, 3, −2) drives as (1, 1, 0).
	a, b := newGame(t, ""), newGame(t, "")
	for k := 0; k < 30; k++ {
		a.Step([]float64{5, 3, -2})
		b.Step([]float64{1, 1, 0})
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
	for _, bad := range []string{"grass", "glacier+saffron", "narrow+broad", "small+large", "clutter+"} {
		if _, err := New(games.Options{Variation: bad}); err == nil {
			t.Errorf("variation %q accepted", bad)
		}
	}
	g, err := New(games.Options{Width: 80, Height: 60})
	if err != nil || g.Spec().Width != 80 || g.Spec().Height != 60 {
		t.Fatalf("80x60: %v", err)
	}
	img := image.NewRGBA(image.Rect(0, 0, 80, 60))
	g.Render(img)
	for _, o := range []games.Options{{Width: 4}, {Height: 300}, {Width: 2000, Height: 2000}} {
		if _, err := New(o); err == nil {
			t.Errorf("frame %dx%d accepted", o.Width, o.Height)
		}
	}
	if gg, err := games.New(Name, games.Options{Variation: "broad"}); err != nil || gg.Spec().Name != Name {
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
		{Variation: "glacier+clutter", Seed: games.HeldOut(2), Steps: 150},
		{Variation: "saffron+grain", Seed: games.HeldOut(3), Steps: 90},
		{Variation: "ember+narrow", Seed: games.HeldOut(4), Steps: 300},
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
		if _, _, lat := g.track.Project(p, g.idx, 24); math.Abs(lat) > g.track.Width/2 {
			return false
		}
	}
	return true
}

// The expert drives a full lap without any corner of the car leaving the
// road on at least 95% of 200 held-out circuits (the target), and
// on a tenth as many with the narrow and broad roads and the wave-shaped
// circuits. The full run takes a few
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
		act := make([]float64, 3)
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
			if st.Reason == games.Completed && !offRoad {
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
	img := image.NewRGBA(image.Rect(0, 0, DefaultSize, DefaultSize))
	act := make([]float64, 3)
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

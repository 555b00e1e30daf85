package drive

import "math"

// ExpertParams tune the pure-pursuit expert. The zero value gives the
// defaults.
type ExpertParams struct {
	// LookBase and LookGain set the look-ahead distance
	// L_d = LookBase + LookGain·v, clamped to [LookMin, LookMax] metres.
	// Defaults 3 m, 0.4 s, 4 m, 14 m.
	LookBase, LookGain, LookMin, LookMax float64
	// LatAccel is the lateral acceleration the speed plan allows in
	// corners (v ≤ √(LatAccel/|κ|)), m/s². Default 3.5.
	LatAccel float64
	// PlanBrake is the deceleration the speed plan assumes when slowing
	// for a corner ahead, m/s². Default 4.
	PlanBrake float64
	// TopSpeed caps the planned speed, m/s. Default 17.
	TopSpeed float64
	// SpeedGain is the proportional gain from speed error (m/s) to the
	// pedal. Default 0.6.
	SpeedGain float64
}

func (p ExpertParams) withDefaults() ExpertParams {
	def := func(v *float64, d float64) { orDefault(v, d, false) }
	def(&p.LookBase, 3)
	def(&p.LookGain, 0.4)
	def(&p.LookMin, 4)
	def(&p.LookMax, 14)
	def(&p.LatAccel, 3.5)
	def(&p.PlanBrake, 4)
	def(&p.TopSpeed, 17)
	def(&p.SpeedGain, 0.6)
	return p
}

// Expert drives the circuit from the true game state: pure-pursuit
// steering (Coulter 1992) towards a point on the centreline one
// look-ahead distance ahead, and a speed plan from the curvature ahead.
type Expert struct {
	// P tunes the expert; zero fields take their defaults.
	P       ExpertParams
	g       *Game
	episode uint64    // the game's episode the plan is for
	plan    []float64 // planned speed at each centreline sample
}

// PurePursuitCurvature returns the curvature κ = 2 sin α / l_d of the
// circular arc that leaves pos along heading and passes through goal,
// where l_d is the distance to goal and α the angle between the heading
// and the line to goal (Coulter 1992, CMU-RI-TR-92-01). Positive κ turns
// left.
func PurePursuitCurvature(pos Vec, heading float64, goal Vec) float64 {
	d := goal.sub(pos)
	ld := d.norm()
	if ld == 0 {
		return 0
	}
	alpha := math.Atan2(d.Y, d.X) - heading
	return 2 * math.Sin(alpha) / ld
}

// SpeedPlan returns, for each centreline sample of tr, the largest speed
// from which the car can still slow to √(latAccel/|κ|) at every sample
// ahead with deceleration brake, capped at top. The circuit is closed, so
// the backward pass runs round it twice.
func SpeedPlan(tr *Track, latAccel, brake, top float64, dst []float64) []float64 {
	n := len(tr.Pts)
	if cap(dst) < n {
		dst = make([]float64, n)
	}
	dst = dst[:n]
	for i, k := range tr.Kappa {
		v := top
		if k != 0 {
			v = math.Min(top, math.Sqrt(latAccel/math.Abs(k)))
		}
		dst[i] = v
	}
	for pass := 0; pass < 2; pass++ {
		for i := n - 1; i >= 0; i-- {
			j := (i + 1) % n
			ds := tr.S[j] - tr.S[i]
			if j == 0 {
				ds = tr.Length - tr.S[i]
			}
			if lim := math.Sqrt(dst[j]*dst[j] + 2*brake*ds); lim < dst[i] {
				dst[i] = lim
			}
		}
	}
	return dst
}

// Act writes steering and pedal for the current state.
func (e *Expert) Act(dst []float64) {
	g := e.g
	p := e.P.withDefaults()
	if e.episode != g.episode {
		e.episode = g.episode
		e.plan = SpeedPlan(g.track, p.LatAccel, p.PlanBrake, p.TopSpeed, e.plan)
	}
	car := &g.car
	v := car.Speed
	ld := math.Max(p.LookMin, math.Min(p.LookMax, p.LookBase+p.LookGain*v))
	// The rear axle sits half a wheelbase behind the tracked centre.
	goal, _, _ := g.track.At(g.s-car.P.Wheelbase/2+ld, g.idx)
	kappa := PurePursuitCurvature(car.Pos, car.Heading, goal)
	delta := math.Atan(kappa * car.P.Wheelbase)
	dst[0] = clamp(delta/car.P.MaxSteer, -1, 1)
	target := e.plan[g.idx]
	if n := len(e.plan); n > 0 {
		target = math.Min(target, e.plan[(g.idx+1)%n])
	}
	dst[1] = clamp(p.SpeedGain*(target-v), -1, 1)
}

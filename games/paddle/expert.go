package paddle

import "math"

// Expert keeps the paddle level with the ball: its target on the track is
// the point at the ball's height. It reads the true game state, but its
// choice is a function of what one frame shows (the ball's and the
// paddle's positions), so a student can learn it from single frames.
//
// With Aim set it also aims: the target is shifted along the paddle so
// that a ball met there would leave straight towards the gate as it is
// now (AimOffset). That scores more goals, but students cloned from it
// learn it far less well in the same training (docs/training.md), so the
// expert the game hands out keeps level only.
type Expert struct {
	g *Game
	// Aim shifts the target to send the ball towards the gate.
	Aim bool
}

// Act writes the action: for the discrete game up (0), stay (1) or down
// (2) towards the target, staying when within half a step's move; for the
// analog game the velocity that reaches it, clamped to [−1,1].
func (e *Expert) Act(dst []float64) {
	g := e.g
	b := g.ball
	// The point of the track level with the ball.
	rho := TrackR - g.cfg.BallRadius
	th := math.Asin(math.Max(-1, math.Min(1, (b.Y-TrackCY)/rho)))
	target := th
	if e.Aim {
		target = th - g.AimOffset(th)*(g.cfg.PaddleHalf+g.cfg.BallRadius)/TrackR
	}
	g.steerTowards(target, dst)
}

// AimOffset is the hit offset (in [−0.85, 0.85] of the paddle's reach,
// as the return rule reads it) that sends a ball met at bearing th on the
// track straight towards the gate's centre as it is now. (Aiming off a
// rail as well scores no more goals at this MaxAngle, and makes the
// target jump where the two aims swap.)
func (g *Game) AimOffset(th float64) float64 {
	r := g.cfg.BallRadius
	rho := TrackR - r
	px, py := TrackCX+rho*math.Cos(th), TrackCY+rho*math.Sin(th)
	d := remainder(math.Atan2(g.gateY-py, Left+r-px) - (th + math.Pi))
	return math.Max(-0.85, math.Min(0.85, d/g.cfg.MaxAngle))
}

// remainder maps an angle into (−π, π].
func remainder(a float64) float64 {
	a = math.Mod(a+math.Pi, 2*math.Pi)
	if a < 0 {
		a += 2 * math.Pi
	}
	return a - math.Pi
}

// steerTowards writes the action that moves the paddle's centre towards
// the track angle phi: discrete up/stay/down with a dead zone of half a
// step's move, or the analog velocity that reaches it, clamped to [−1,1].
func (g *Game) steerTowards(phi float64, dst []float64) {
	phi = math.Max(-g.phiMax, math.Min(g.phiMax, phi))
	d := (phi - g.phi) * TrackR // pixels of arc
	sp := g.cfg.PaddleSpeed
	if g.cfg.Analog {
		dst[0] = math.Max(-1, math.Min(1, d/sp))
		return
	}
	switch {
	case d > sp/2:
		dst[0] = 2
	case d < -sp/2:
		dst[0] = 0
	default:
		dst[0] = 1
	}
}

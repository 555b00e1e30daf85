package paddle

import "math"

// Expert moves the paddle under the ball: its target is the ball's
// current x, read from the true game state. Over the held-out seeds this
// returns as many balls as steering to the predicted intercept (see
// Intercept), and unlike that planner its choice is a function of what one
// frame shows (the ball's and the paddle's positions), so a student can
// learn it from single frames.
type Expert struct {
	g *Game
}

// Fold maps a coordinate of a straight path into [lo, hi] as reflections
// off walls at lo and hi would (method of images): the path's image is
// periodic with period 2(hi−lo) and mirrored in every other cell.
func Fold(x, lo, hi float64) float64 {
	w := hi - lo
	m := math.Mod(x-lo, 2*w)
	if m < 0 {
		m += 2 * w
	}
	if m > w {
		m = 2*w - m
	}
	return lo + m
}

// Intercept predicts the x at which the centre of a ball with state b and
// radius r next reaches the paddle line, bouncing off the side walls and
// the top wall. It returns the step count until then as well.
func Intercept(b Ball, r float64) (x, steps float64) {
	line := PaddleY - r
	if b.VY == 0 {
		return b.X, math.Inf(1)
	}
	var dist float64
	if b.VY > 0 {
		dist = line - b.Y
	} else {
		dist = (b.Y - (Top + r)) + (line - (Top + r))
	}
	t := dist / math.Abs(b.VY)
	return Fold(b.X+b.VX*t, Left+r, Right-r), t
}

// Act writes the action: for the discrete game left (0), stay (1) or
// right (2) towards the ball's x, staying when within half a step's move;
// for the analog game the velocity that reaches it, clamped to [−1,1].
func (e *Expert) Act(dst []float64) { e.g.steerTowards(e.g.ball.X, dst) }

// steerTowards writes the action that moves the paddle's centre towards
// x: discrete left/stay/right with a dead zone of half a step's move, or
// the analog velocity that reaches it, clamped to [−1,1].
func (g *Game) steerTowards(x float64, dst []float64) {
	dx := x - g.paddleX
	sp := g.cfg.PaddleSpeed
	if g.cfg.Analog {
		dst[0] = math.Max(-1, math.Min(1, dx/sp))
		return
	}
	switch {
	case dx > sp/2:
		dst[0] = 2
	case dx < -sp/2:
		dst[0] = 0
	default:
		dst[0] = 1
	}
}

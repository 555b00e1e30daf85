package paddle

import (
	"fmt"
	"image"
	"image/color"
	"math"
	"math/rand/v2"

	"tilebench/games"
	"tilebench/internal/seeds"
)

// Name is the registered name of the paddle game.
const Name = "paddle"

// Field geometry in pixels, y down (the frame is the field, 120 wide and
// 80 high). Rails close the top and the bottom; the far wall on the left
// has a drifting gate; the paddle slides along a circular track on the
// right, the arc of radius TrackR about (TrackCX, TrackCY), whose inner
// face it forms. Behind the track is the run-off, where a ball the paddle
// missed is lost.
const (
	Width   = 120
	Height  = 80
	Rim     = 3.0                   // thickness of the rails and the far wall
	Left    = Rim                   // inner face of the far wall
	Top     = Rim                   // inner face of the top rail
	Bottom  = float64(Height) - Rim // inner face of the bottom rail
	TrackCX = 52.0                  // centre of the track's circle
	TrackCY = float64(Height) / 2
	TrackR  = 60.0 // radius of the paddle's face
	PaddleH = 3.0  // paddle thickness, outwards from its face

	serveX0, serveX1 = 14.0, 24.0 // serve x range
	serveY0, serveY1 = 18.0, 62.0 // serve y range
	serveTilt        = 0.45       // largest serve angle from the +x axis (rad)
	obstacleX        = 40.0       // left face of the drifting post
	obstacleW        = 3.0        // its thickness
	obstacleL        = 16.0       // its length
	obstacleV        = 0.4        // its speed, pixels per step
	looseSteps       = 6          // steps a missed ball stays in play behind the track
	maxEvents        = 16         // collisions handled within one step
	ringGap          = 9.0        // spacing of the background's arcs
)

// Scores. A goal is what a ball is for; a lost ball costs half a goal; a
// return is worth a little more the longer the ball's rally has lasted,
// up to a cap, so a policy that keeps a ball alive gains, but never as
// much as one that scores with it.
const (
	GoalPoints  = 6.0  // a ball sent out through the gate
	LostPoints  = -3.0 // a ball the paddle missed
	RallyPoints = 0.25 // the k-th return of a ball scores k·RallyPoints...
	RallyCap    = 4    // ...for k up to RallyCap, RallyCap·RallyPoints after
)

// Palette is the set of colours the game is drawn with.
type Palette struct {
	// Name is the palette's variation name.
	Name string
	// TopLeft, TopRight, BottomLeft and BottomRight are the field's colours
	// at its corners; the background blends between them, so every part of
	// the field, rails and run-off included, shows by its colour where it
	// is.
	TopLeft, TopRight, BottomLeft, BottomRight color.RGBA
	// Wall tints the rails and the far wall (mixed into the field's colour
	// there), WallLit their inner edge.
	Wall, WallLit color.RGBA
	// Paddle, Ball and Obstacle colour the moving pieces.
	Paddle, Ball, Obstacle color.RGBA
}

func rgb(r, g, b uint8) color.RGBA { return color.RGBA{r, g, b, 255} }

// Palettes lists the palettes; the first ("copper") is the training one.
var Palettes = []Palette{
	{Name: "copper", TopLeft: rgb(132, 40, 56), TopRight: rgb(30, 50, 112), BottomLeft: rgb(104, 30, 44), BottomRight: rgb(18, 38, 90),
		Wall: rgb(178, 104, 62), WallLit: rgb(226, 156, 104),
		Paddle: rgb(118, 236, 188), Ball: rgb(252, 244, 204), Obstacle: rgb(236, 92, 150)},
	{Name: "lagoon", TopLeft: rgb(12, 104, 96), TopRight: rgb(44, 40, 118), BottomLeft: rgb(8, 78, 74), BottomRight: rgb(30, 26, 92),
		Wall: rgb(214, 178, 70), WallLit: rgb(246, 214, 120),
		Paddle: rgb(250, 122, 92), Ball: rgb(230, 250, 255), Obstacle: rgb(156, 112, 226)},
	{Name: "orchid", TopLeft: rgb(112, 40, 128), TopRight: rgb(40, 70, 60), BottomLeft: rgb(86, 28, 100), BottomRight: rgb(26, 52, 44),
		Wall: rgb(96, 176, 214), WallLit: rgb(150, 214, 240),
		Paddle: rgb(250, 204, 84), Ball: rgb(255, 255, 255), Obstacle: rgb(92, 210, 142)},
}

// Config is a fully resolved game setup. Variations are named edits of
// DefaultConfig.
type Config struct {
	// Palette is the look.
	Palette Palette
	// BallRadius in pixels. Default 1.6.
	BallRadius float64
	// PaddleHalf is half the paddle's length along the track (pixels of
	// arc). Default 8.
	PaddleHalf float64
	// PaddleSpeed is how far the paddle slides along the track per step
	// at full deflection (pixels of arc). Default 2.4.
	PaddleSpeed float64
	// StartSpeed is the ball's speed at each serve (pixels per step),
	// SpeedUp multiplies it at each return, up to MaxSpeed. Defaults 2.2,
	// 1.03, 4.0.
	StartSpeed, SpeedUp, MaxSpeed float64
	// MaxAngle is the largest angle between the track's inward normal and
	// the direction a ball leaves the paddle at (hit at the very end),
	// radians. Default 0.4.
	MaxAngle float64
	// GateHalf is half the height of the gate in the far wall (pixels).
	// Default 12.
	GateHalf float64
	// GateSpeed is how fast the gate drifts up and down (pixels per
	// step). Default 0.12.
	GateSpeed float64
	// Obstacle adds a post drifting up and down the middle of the field.
	Obstacle bool
	// Analog makes the action one continuous value in [−1,1] (the
	// paddle's velocity along the track as a fraction of PaddleSpeed,
	// positive downwards) instead of up/stay/down.
	Analog bool
	// Balls ends the episode (games.Completed) when this many served
	// balls have been scored or lost. Default 10.
	Balls int
	// MaxSteps is the step limit (games.TimeUp). Default 1200.
	MaxSteps int
}

// DefaultConfig is the training setup.
func DefaultConfig() Config {
	return Config{Palette: Palettes[0], BallRadius: 1.6, PaddleHalf: 8, PaddleSpeed: 2.4,
		StartSpeed: 2.2, SpeedUp: 1.03, MaxSpeed: 4.0, MaxAngle: 0.4, GateHalf: 12, GateSpeed: 0.12,
		Balls: 10, MaxSteps: 1200}
}

func vary(name, doc, group string, edit func(*Config)) games.Variation[Config] {
	return games.Variation[Config]{Name: name, Doc: doc, Group: group, Edit: edit}
}

// Variations are the named edits of DefaultConfig.
var Variations = games.VariationSet[Config]{
	vary("lagoon", "held-out palette: deep teal field, gold walls, coral paddle", "palette", func(c *Config) { c.Palette = Palettes[1] }),
	vary("orchid", "held-out palette: violet field, sky walls, amber paddle", "palette", func(c *Config) { c.Palette = Palettes[2] }),
	vary("bigball", "ball radius 2.6 instead of 1.6", "ball", func(c *Config) { c.BallRadius = 2.6 }),
	vary("tinyball", "ball radius 1.0", "ball", func(c *Config) { c.BallRadius = 1.0 }),
	vary("short", "paddle 10 px long instead of 16", "paddle", func(c *Config) { c.PaddleHalf = 5 }),
	vary("long", "paddle 24 px long", "paddle", func(c *Config) { c.PaddleHalf = 12 }),
	vary("brisk", "faster ball: serve 3.0, top speed 4.8 px/step", "speed", func(c *Config) { c.StartSpeed, c.MaxSpeed = 3.0, 4.8 }),
	vary("slot", "gate 14 px high instead of 24, drifting 2.5 times as fast", "gate", func(c *Config) { c.GateHalf, c.GateSpeed = 7, 0.3 }),
	vary("drifter", "a post drifting up and down mid-field deflects the ball", "obstacle", func(c *Config) { c.Obstacle = true }),
	vary("analog", "continuous paddle velocity in [−1,1] instead of up/stay/down", "action", func(c *Config) { c.Analog = true }),
}

// ParseVariation applies a variation string (see Variations; names
// joined with "+") to the default config and returns it with the
// canonical spelling.
func ParseVariation(s string) (Config, string, error) {
	c := DefaultConfig()
	canon, err := Variations.Apply(Name, s, &c)
	return c, canon, err
}

// Game is the paddle game.
type Game struct {
	cfg     Config
	spec    games.Spec
	bg      []byte    // the static background frame, RGBA
	gateBg  []byte    // the far wall's columns drawn open, RGBA rows of 4·farCols bytes
	pcg     *rand.PCG // re-seeded by Reset, so that a reset allocates nothing
	rng     *rand.Rand
	ball    Ball
	phi     float64 // the paddle centre's angle on the track (rad, positive downwards)
	phiMax  float64 // |phi| limit: the paddle's ends stay between the rails
	gateY   float64 // gate centre
	gateV   float64
	obsY    float64 // post top end
	obsV    float64
	loose   int // steps since the ball passed the track un-hit (0: in play)
	rally   int // returns of the ball in play
	served  int // balls served this episode
	goals   int
	lost    int
	returns int
	steps   int
	done    bool
	reason  games.EndReason
	expert  *Expert
	closed  bool // tests: the whole track and the far wall reflect
	events  [maxEvents]Event
	nEvents int
}

// farCols is the number of pixel columns of the far wall.
const farCols = int(Left)

// Ball is the ball's state: centre (pixels, y down) and velocity (pixels
// per step).
type Ball struct {
	X, Y, VX, VY float64
}

// Speed is the length of the velocity.
func (b Ball) Speed() float64 { return math.Hypot(b.VX, b.VY) }

// EventKind says what happened to the ball.
type EventKind int

// Kinds of event.
const (
	HitTop      EventKind = iota // the top rail
	HitBottom                    // the bottom rail
	HitWall                      // the far wall, outside the gate
	HitPaddle                    // a return
	HitObstacle                  // the drifting post
	Goal                         // out through the gate
	Passed                       // across the track where the paddle is not
	HitTrack                     // closed-box tests only: the track as a mirror

	// hitObstacleEnd is HitObstacle on the post's top or bottom end (VY
	// flips); reported as HitObstacle.
	hitObstacleEnd EventKind = 100
)

// Event is one collision inside a step: the ball's state just before and
// just after it, and the fraction of the step at which it happened.
type Event struct {
	Kind          EventKind
	At            float64
	Before, After Ball
}

func init() {
	games.Provide(Name, Variations.Names(), func(o games.Setup) (games.Game, error) { return New(o) })
}

// New builds the paddle game. The field is always 120×80: other frame
// sizes are refused.
func New(o games.Setup) (*Game, error) {
	cfg, canon, err := ParseVariation(o.Variation)
	if err != nil {
		return nil, err
	}
	if (o.Width != 0 && o.Width != Width) || (o.Height != 0 && o.Height != Height) {
		return nil, fmt.Errorf("paddle: frame %dx%d: the field is fixed at %dx%d", o.Width, o.Height, Width, Height)
	}
	return NewConfig(cfg, canon)
}

// NewConfig builds the game from a resolved config; variation is only
// reported in Spec.
func NewConfig(cfg Config, variation string) (*Game, error) {
	switch {
	case cfg.BallRadius <= 0 || cfg.BallRadius > 4:
		return nil, fmt.Errorf("paddle: ball radius %v: want (0, 4]", cfg.BallRadius)
	case cfg.PaddleHalf < 2 || cfg.PaddleHalf > 20:
		return nil, fmt.Errorf("paddle: paddle half-length %v: want [2, 20]", cfg.PaddleHalf)
	case cfg.PaddleSpeed <= 0 || cfg.PaddleSpeed > 10 || cfg.StartSpeed <= 0 || cfg.MaxSpeed < cfg.StartSpeed || cfg.MaxSpeed > 6 || cfg.SpeedUp < 1:
		return nil, fmt.Errorf("paddle: speeds (paddle %v, ball %v..%v ×%v) out of range", cfg.PaddleSpeed, cfg.StartSpeed, cfg.MaxSpeed, cfg.SpeedUp)
	case cfg.MaxAngle <= 0 || cfg.MaxAngle >= 1.3:
		return nil, fmt.Errorf("paddle: max angle %v: want (0, 1.3) rad", cfg.MaxAngle)
	case cfg.GateHalf < 3 || cfg.GateHalf > 30 || cfg.GateSpeed < 0 || cfg.GateSpeed > 2:
		return nil, fmt.Errorf("paddle: gate half-height %v (want [3, 30]) or speed %v (want [0, 2])", cfg.GateHalf, cfg.GateSpeed)
	case cfg.Balls < 1 || cfg.MaxSteps < 1:
		return nil, fmt.Errorf("paddle: ball count %d and step limit %d must be positive", cfg.Balls, cfg.MaxSteps)
	}
	g := &Game{cfg: cfg, pcg: rand.NewPCG(0, 0)}
	g.rng = rand.New(g.pcg)
	act := games.Controls{Kind: games.Discrete, Names: []string{"up", "stay", "down"}}
	if cfg.Analog {
		act = games.Controls{Kind: games.Continuous, Names: []string{"slide"}, Low: []float64{-1}, High: []float64{1}}
	}
	g.spec = games.Spec{Name: Name, Variation: variation, Width: Width, Height: Height, Action: act, StepLimit: cfg.MaxSteps,
		Floors: floorsOf(variation)}
	// The paddle's outer corners stay between the rails.
	a := cfg.PaddleHalf / TrackR
	g.phiMax = math.Asin((Bottom-TrackCY)/(TrackR+PaddleH)) - a
	g.bg, g.gateBg = background(cfg.Palette)
	g.expert = &Expert{g: g}
	g.Reset(games.HeldOut(0))
	return g, nil
}

// Spec describes the game.
func (g *Game) Spec() games.Spec { return g.spec }

// Config returns the resolved configuration.
func (g *Game) Config() Config { return g.cfg }

// Ball returns the ball's state.
func (g *Game) Ball() Ball { return g.ball }

// PaddleAngle is the angle of the paddle's centre on the track, radians
// from the +x axis about (TrackCX, TrackCY), positive downwards.
func (g *Game) PaddleAngle() float64 { return g.phi }

// GateY is the centre of the gate in the far wall.
func (g *Game) GateY() float64 { return g.gateY }

// Returns counts this episode's returns.
func (g *Game) Returns() int { return g.returns }

// Goals counts this episode's balls sent out through the gate.
func (g *Game) Goals() int { return g.goals }

// Lost counts this episode's balls the paddle missed.
func (g *Game) Lost() int { return g.lost }

// Events returns the collisions of the last step (valid until the next).
func (g *Game) Events() []Event { return g.events[:g.nEvents] }

// serveKey names the stream every random draw of an episode comes from.
var serveKey = seeds.StreamKey("serve")

// Reset starts an episode: paddle at the middle of the track, gate and
// post (if any) at seeded places, and the first serve drawn from the
// seed's "serve" stream (the generator seeds.NewRand would make, re-seeded
// in place). It allocates nothing.
func (g *Game) Reset(seed uint64) {
	s := seeds.DeriveSeed(seed, serveKey)
	g.pcg.Seed(seeds.DeriveSeed(s, 1), seeds.DeriveSeed(s, 2))
	g.phi = 0
	lo, hi := g.gateRange()
	g.gateY = lo + (hi-lo)*g.rng.Float64()
	g.gateV = g.cfg.GateSpeed
	if g.rng.IntN(2) == 0 {
		g.gateV = -g.gateV
	}
	g.obsY = Top + (Bottom-Top-obstacleL)*g.rng.Float64()
	g.obsV = obstacleV
	if g.rng.IntN(2) == 0 {
		g.obsV = -obstacleV
	}
	g.served, g.goals, g.lost, g.returns, g.steps = 0, 0, 0, 0, 0
	g.done, g.reason = false, games.NotEnded
	g.nEvents = 0
	g.serve()
}

// gateRange is the range of the gate's centre: its edges stay two pixels
// inside the rails.
func (g *Game) gateRange() (float64, float64) {
	return Top + g.cfg.GateHalf + 2, Bottom - g.cfg.GateHalf - 2
}

// serve puts a new ball near the far wall, heading towards the track at a
// random tilt, at the starting speed.
func (g *Game) serve() {
	x := serveX0 + (serveX1-serveX0)*g.rng.Float64()
	y := serveY0 + (serveY1-serveY0)*g.rng.Float64()
	a := serveTilt * (2*g.rng.Float64() - 1)
	s := g.cfg.StartSpeed
	g.ball = Ball{X: x, Y: y, VX: s * math.Cos(a), VY: s * math.Sin(a)}
	g.loose, g.rally = 0, 0
	g.served++
}

// Step moves the paddle by the action (discrete: 0 up, 1 stay, 2 down;
// analog: velocity in [−1,1], clamped, positive downwards), the gate and
// the post, then the ball for one step, resolving every collision inside
// the step in time order. After the episode has ended it changes nothing
// and reports the end again with zero reward.
func (g *Game) Step(action []float64) (games.Step, error) {
	if err := g.spec.Action.Check(action); err != nil {
		return games.Step{}, fmt.Errorf("paddle: %w", err)
	}
	if g.done {
		return games.Step{Done: true, Reason: g.reason}, nil
	}
	var move float64
	if g.cfg.Analog {
		move = math.Max(-1, math.Min(1, action[0]))
	} else {
		move = action[0] - 1
	}
	g.phi = math.Max(-g.phiMax, math.Min(g.phiMax, g.phi+move*g.cfg.PaddleSpeed/TrackR))
	g.moveGate()
	if g.cfg.Obstacle {
		g.moveObstacle()
	}
	g.nEvents = 0
	reward := g.advance(1)
	switch {
	case g.ball.X < -10: // out through the gate (advance moved it away)
		g.goals++
		reward += GoalPoints
		g.endBall()
	case g.loose > 0:
		g.loose++
		d := math.Hypot(g.ball.X-TrackCX, g.ball.Y-TrackCY)
		if g.loose > looseSteps || d >= TrackR+PaddleH+g.cfg.BallRadius {
			g.lost++
			reward += LostPoints
			g.endBall()
		}
	}
	g.steps++
	if !g.done && g.steps >= g.cfg.MaxSteps {
		g.done, g.reason = true, games.TimeUp
	}
	return games.Step{Reward: reward, Done: g.done, Reason: g.reason}, nil
}

// endBall serves the next ball, or ends the episode when the last one has
// been played.
func (g *Game) endBall() {
	if g.served >= g.cfg.Balls {
		g.done, g.reason = true, games.Completed
		g.ball = Ball{X: -20, Y: TrackCY} // off the field: drawn nowhere
		return
	}
	g.serve()
}

func (g *Game) moveGate() {
	lo, hi := g.gateRange()
	g.gateY += g.gateV
	if g.gateY < lo {
		g.gateY, g.gateV = 2*lo-g.gateY, -g.gateV
	} else if g.gateY > hi {
		g.gateY, g.gateV = 2*hi-g.gateY, -g.gateV
	}
}

func (g *Game) moveObstacle() {
	g.obsY += g.obsV
	if g.obsY < Top {
		g.obsY, g.obsV = 2*Top-g.obsY, -g.obsV
	} else if g.obsY+obstacleL > Bottom {
		g.obsY, g.obsV = 2*(Bottom-obstacleL)-g.obsY, -g.obsV
	}
	// If the post moved into the ball, push the ball out through the
	// nearest face that leaves it room inside the rails, and send it away
	// from the post along that axis.
	b := &g.ball
	r := g.cfg.BallRadius
	x0, x1 := obstacleX-r, obstacleX+obstacleW+r
	y0, y1 := g.obsY-r, g.obsY+obstacleL+r
	if b.X <= x0 || b.X >= x1 || b.Y <= y0 || b.Y >= y1 {
		return
	}
	best, face := math.Inf(1), -1
	for f, d := range [4]float64{b.X - x0, x1 - b.X, b.Y - y0, y1 - b.Y} {
		room := f < 2 || (f == 2 && y0 >= Top+r) || (f == 3 && y1 <= Bottom-r)
		if room && d < best {
			best, face = d, f
		}
	}
	switch face {
	case 0:
		b.X, b.VX = x0, -math.Abs(b.VX)
	case 1:
		b.X, b.VX = x1, math.Abs(b.VX)
	case 2:
		b.Y, b.VY = y0, -math.Abs(b.VY)
	default:
		b.Y, b.VY = y1, math.Abs(b.VY)
	}
}

// trackTime is the first time t ≥ 0 at which the ball's centre, moving
// from inside the circle of radius rho about the track's centre, reaches
// it: the larger root of |d + v·t|² = rho² (d the offset from the centre;
// c < 0 inside, so the roots have opposite signs). It returns +Inf when
// the ball does not move, or is outside and moving away.
func trackTime(b Ball, rho float64) float64 {
	dx, dy := b.X-TrackCX, b.Y-TrackCY
	a := b.VX*b.VX + b.VY*b.VY
	h := dx*b.VX + dy*b.VY
	c := dx*dx + dy*dy - rho*rho
	if a == 0 || (c > 0 && h >= 0) {
		return math.Inf(1)
	}
	disc := h*h - a*c
	if disc < 0 {
		return math.Inf(1)
	}
	// The positive root without cancellation: (−h + √disc)/a, or −c/(h + √disc)
	// when h > 0.
	s := math.Sqrt(disc)
	if h > 0 {
		return -c / (h + s)
	}
	return (s - h) / a
}

// advance moves the ball for tau steps of time, reflecting it off the
// rails and the far wall (law of reflection: the velocity component along
// the wall's normal changes sign, the other is kept, so the speed is
// kept) and the post, returning it off the paddle, and letting it through
// the gate or across the track where the paddle is not. It records the
// events and returns the reward for returns.
func (g *Game) advance(tau float64) float64 {
	b := &g.ball
	r := g.cfg.BallRadius
	reward := 0.0
	rho := TrackR - r
	for n := 0; n < maxEvents && tau > 0; n++ {
		t, kind := tau, EventKind(-1)
		try := func(dt float64, k EventKind) {
			if dt >= 0 && dt < t {
				t, kind = dt, k
			}
		}
		if b.VY < 0 {
			try((Top+r-b.Y)/b.VY, HitTop)
		} else if b.VY > 0 {
			try((Bottom-r-b.Y)/b.VY, HitBottom)
		}
		if b.VX < 0 && b.X >= Left+r-1e-9 {
			try((Left+r-b.X)/b.VX, HitWall)
		}
		if g.loose == 0 {
			// Only a ball moving outwards meets the track from inside.
			if (b.X-TrackCX)*b.VX+(b.Y-TrackCY)*b.VY > 0 || g.closed {
				try(trackTime(*b, rho), HitTrack)
			}
		}
		if g.cfg.Obstacle {
			if dt, end, ok := g.obstacleHit(r); ok && dt < t {
				t = dt
				kind = HitObstacle
				if end {
					kind = hitObstacleEnd
				}
			}
		}
		b.X += b.VX * t
		b.Y += b.VY * t
		tau -= t
		if kind == -1 {
			break
		}
		ev := Event{Kind: kind, At: 1 - tau, Before: *b}
		switch kind {
		case HitTop, HitBottom:
			b.VY = -b.VY
		case HitWall:
			if !g.closed && math.Abs(b.Y-g.gateY) <= g.cfg.GateHalf-r {
				ev.Kind = Goal
				// Out of the field: the step ends here.
				b.X = -20
				tau = 0
			} else {
				b.VX = -b.VX
			}
		case HitObstacle:
			b.VX = -b.VX
		case hitObstacleEnd:
			ev.Kind = HitObstacle
			b.VY = -b.VY
		case HitTrack:
			th := math.Atan2(b.Y-TrackCY, b.X-TrackCX)
			reach := (g.cfg.PaddleHalf + r) / TrackR
			switch {
			case g.closed:
				// Mirror: reflect about the radial normal.
				nx, ny := math.Cos(th), math.Sin(th)
				vn := b.VX*nx + b.VY*ny
				b.VX -= 2 * vn * nx
				b.VY -= 2 * vn * ny
			case math.Abs(th-g.phi) <= reach:
				ev.Kind = HitPaddle
				g.returns++
				g.rally++
				reward += RallyPoints * float64(min(g.rally, RallyCap))
				// Leave along the inward normal turned by the offset
				// of the hit from the paddle's centre.
				off := math.Max(-1, math.Min(1, (th-g.phi)/reach))
				a := th + math.Pi + off*g.cfg.MaxAngle
				s := math.Min(g.cfg.MaxSpeed, b.Speed()*g.cfg.SpeedUp)
				b.VX, b.VY = s*math.Cos(a), s*math.Sin(a)
			default:
				ev.Kind = Passed
				g.loose = 1
			}
		}
		ev.After = *b
		if g.nEvents < maxEvents {
			g.events[g.nEvents] = ev
			g.nEvents++
		}
	}
	return reward
}

// obstacleHit is the slab test of the ball's centre against the post
// grown by the ball's radius. It returns the entry time, whether the face
// entered is an end (top or bottom, so VY flips), and whether the ball
// enters within the coming step at all.
func (g *Game) obstacleHit(r float64) (float64, bool, bool) {
	b := g.ball
	x0, x1 := obstacleX-r, obstacleX+obstacleW+r
	y0, y1 := g.obsY-r, g.obsY+obstacleL+r
	tx0, tx1 := slab(b.X, b.VX, x0, x1)
	ty0, ty1 := slab(b.Y, b.VY, y0, y1)
	enter := math.Max(tx0, ty0)
	exit := math.Min(tx1, ty1)
	if enter > exit || enter < 0 || exit <= 0 {
		return 0, false, false
	}
	return enter, ty0 >= tx0, true
}

// slab returns the interval of times at which p + v·t lies in [lo, hi].
func slab(p, v, lo, hi float64) (float64, float64) {
	if v == 0 {
		if p > lo && p < hi {
			return math.Inf(-1), math.Inf(1)
		}
		return math.Inf(1), math.Inf(-1)
	}
	a, b := (lo-p)/v, (hi-p)/v
	if a > b {
		a, b = b, a
	}
	return a, b
}

// Render copies the static field into dst, opens the gate, and draws the
// post, the paddle and the ball with soft edges. It does not allocate. A
// dst of another size than 120×80 is left untouched.
func (g *Game) Render(dst *image.RGBA) {
	if dst.Rect.Dx() != Width || dst.Rect.Dy() != Height {
		return
	}
	const row = 4 * Width
	if dst.Stride == row && len(dst.Pix) >= len(g.bg) {
		copy(dst.Pix, g.bg)
	} else {
		for y := 0; y < Height; y++ {
			copy(dst.Pix[y*dst.Stride:y*dst.Stride+row], g.bg[y*row:(y+1)*row])
		}
	}
	g.drawGate(dst)
	p := g.cfg.Palette
	if g.cfg.Obstacle {
		h := obstacleW / 2
		capsule(dst, obstacleX+h, g.obsY+h, obstacleX+h, g.obsY+obstacleL-h, h, p.Obstacle)
	}
	g.drawPaddle(dst, p.Paddle)
	capsule(dst, g.ball.X, g.ball.Y, g.ball.X, g.ball.Y, g.cfg.BallRadius, p.Ball)
}

// drawGate copies the open look of the far wall into the rows the gate
// spans, blending the two partly covered edge rows by coverage.
func (g *Game) drawGate(dst *image.RGBA) {
	lo, hi := g.gateY-g.cfg.GateHalf, g.gateY+g.cfg.GateHalf
	const n = 4 * farCols
	for y := max(0, int(lo)); y <= min(Height-1, int(hi)); y++ {
		cov := math.Min(hi, float64(y+1)) - math.Max(lo, float64(y))
		if cov <= 0 {
			continue
		}
		d := dst.Pix[y*dst.Stride : y*dst.Stride+n : y*dst.Stride+n]
		s := g.gateBg[y*n : (y+1)*n : (y+1)*n]
		if cov >= 1 {
			copy(d, s)
			continue
		}
		a := uint32(cov * 256)
		for i := 0; i < n; i += 4 {
			d[i] = uint8((uint32(d[i])*(256-a) + uint32(s[i])*a) >> 8)
			d[i+1] = uint8((uint32(d[i+1])*(256-a) + uint32(s[i+1])*a) >> 8)
			d[i+2] = uint8((uint32(d[i+2])*(256-a) + uint32(s[i+2])*a) >> 8)
		}
	}
}

// drawPaddle blends c over the points within PaddleH/2 of the paddle's
// centre line (the arc of radius TrackR + PaddleH/2 spanning the paddle's
// angles), with the one-pixel soft edge of capsule.
func (g *Game) drawPaddle(dst *image.RGBA, c color.RGBA) {
	h := PaddleH / 2
	rm := TrackR + h
	a := g.cfg.PaddleHalf / TrackR
	ux, uy := math.Cos(g.phi), math.Sin(g.phi)
	sinA, cosA := math.Sin(a), math.Cos(a)
	// The two ends of the centre line.
	e0x, e0y := TrackCX+rm*math.Cos(g.phi-a), TrackCY+rm*math.Sin(g.phi-a)
	e1x, e1y := TrackCX+rm*math.Cos(g.phi+a), TrackCY+rm*math.Sin(g.phi+a)
	pad := h + 1
	x0 := math.Min(math.Min(e0x, e1x), TrackCX+rm*ux) - pad
	x1 := math.Max(math.Max(e0x, e1x), TrackCX+rm*ux) + pad
	y0 := math.Min(e0y, e1y) - pad
	y1 := math.Max(e0y, e1y) + pad
	cx0, cx1 := max(int(math.Floor(x0)), 0), min(int(math.Ceil(x1)), Width-1)
	cy0, cy1 := max(int(math.Floor(y0)), 0), min(int(math.Ceil(y1)), Height-1)
	// Every covered point, ends included, lies in the ring of radii
	// rm ± (h + ½): test the squared distance before anything else.
	in2, out2 := (rm-h-0.5)*(rm-h-0.5), (rm+h+0.5)*(rm+h+0.5)
	for py := cy0; py <= cy1; py++ {
		fy := float64(py) + 0.5
		dy := fy - TrackCY
		if out2 <= dy*dy {
			continue
		}
		// The ring's columns in this row (the paddle is right of the
		// centre, its angles within ±π/2).
		rx0, rx1 := cx0, cx1
		if in2 > dy*dy {
			rx0 = max(rx0, int(TrackCX+math.Sqrt(in2-dy*dy)-0.5))
		}
		rx1 = min(rx1, int(TrackCX+math.Sqrt(out2-dy*dy)+0.5))
		for px := rx0; px <= rx1; px++ {
			fx := float64(px) + 0.5
			dx := fx - TrackCX
			d2 := dx*dx + dy*dy
			if d2 <= in2 || d2 >= out2 {
				continue
			}
			rho := math.Sqrt(d2)
			// Within the paddle's angles: |sin(θ−φ)| ≤ sin a with
			// cos(θ−φ) ≥ cos a, from the cross and dot products with u.
			cr, dt := ux*dy-uy*dx, ux*dx+uy*dy
			var dist float64
			if math.Abs(cr) <= sinA*rho && dt >= cosA*rho {
				dist = math.Abs(rho - rm)
			} else {
				ex, ey := e1x, e1y
				if cr < 0 {
					ex, ey = e0x, e0y
				}
				dist = math.Hypot(fx-ex, fy-ey)
			}
			blend(dst, px, py, h+0.5-dist, c)
		}
	}
}

// blend mixes c into the pixel (px, py) by coverage cov, clamped to [0,1].
func blend(dst *image.RGBA, px, py int, cov float64, c color.RGBA) {
	if cov <= 0 {
		return
	}
	o := py*dst.Stride + 4*px
	pix := dst.Pix[o : o+3 : o+3]
	if cov >= 1 {
		pix[0], pix[1], pix[2] = c.R, c.G, c.B
		return
	}
	a := uint32(cov * 256)
	pix[0] = uint8((uint32(pix[0])*(256-a) + uint32(c.R)*a) >> 8)
	pix[1] = uint8((uint32(pix[1])*(256-a) + uint32(c.G)*a) >> 8)
	pix[2] = uint8((uint32(pix[2])*(256-a) + uint32(c.B)*a) >> 8)
}

// capsule blends c into dst over the points within rad of the axis-aligned
// segment from (x0, y0) to (x1, y1) (x0 ≤ x1, y0 ≤ y1; a point when they
// are equal), with a one-pixel soft edge (coverage rad + ½ − distance,
// clamped to [0,1]).
func capsule(dst *image.RGBA, x0, y0, x1, y1, rad float64, c color.RGBA) {
	cx0 := max(int(math.Floor(x0-rad-1)), 0)
	cx1 := min(int(math.Ceil(x1+rad+1)), Width-1)
	cy0 := max(int(math.Floor(y0-rad-1)), 0)
	cy1 := min(int(math.Ceil(y1+rad+1)), Height-1)
	// Squared distances beyond outer2 get no coverage, within inner2 full
	// coverage; only the one-pixel rim in between needs the square root.
	outer2 := (rad + 0.5) * (rad + 0.5)
	inner2 := 0.0
	if rad > 0.5 {
		inner2 = (rad - 0.5) * (rad - 0.5)
	}
	for py := cy0; py <= cy1; py++ {
		fy := float64(py) + 0.5
		dy := 0.0
		if fy < y0 {
			dy = y0 - fy
		} else if fy > y1 {
			dy = fy - y1
		}
		for px := cx0; px <= cx1; px++ {
			fx := float64(px) + 0.5
			dx := 0.0
			if fx < x0 {
				dx = x0 - fx
			} else if fx > x1 {
				dx = fx - x1
			}
			d2 := dx*dx + dy*dy
			switch {
			case d2 >= outer2:
			case d2 <= inner2:
				blend(dst, px, py, 1, c)
			default:
				blend(dst, px, py, rad+0.5-math.Sqrt(d2), c)
			}
		}
	}
}

// background draws the static field once: a blend between the four
// corner colours crossed by faint lighter arcs about the track's centre,
// the run-off behind the track in a darker shade of the same blend, and
// the rails and the far wall tinted over it with a lit inner edge. It also
// returns the far wall's columns drawn open (run-off shade, lit edges
// kept on the rails only), which Render copies into the gate's rows.
// Walls and run-off keep the blend underneath, so no part of the frame
// stands out but the moving pieces and the gate.
func background(p Palette) (bg, gate []byte) {
	bg = make([]byte, 4*Width*Height)
	gate = make([]byte, 4*farCols*Height)
	for y := 0; y < Height; y++ {
		for x := 0; x < Width; x++ {
			fx, fy := float64(x)+0.5, float64(y)+0.5
			u, v := fx/Width, fy/Height
			base := mix(mix(p.TopLeft, p.TopRight, u), mix(p.BottomLeft, p.BottomRight, u), v)
			d := math.Hypot(fx-TrackCX, fy-TrackCY)
			if w := 1 - math.Abs(math.Mod(d, ringGap)-ringGap/2)/0.9; w > 0 {
				base = lift(base, 16*w)
			}
			dark := mix(base, rgb(0, 0, 0), 0.45)
			c := base
			switch {
			case fy < Top || fy > Bottom:
				if fy >= Top-1 && fy < Top || fy > Bottom && fy <= Bottom+1 {
					c = mix(base, p.WallLit, 0.5)
				} else {
					c = mix(base, p.Wall, 0.35)
				}
			case fx < Left:
				if fx >= Left-1 {
					c = mix(base, p.WallLit, 0.5)
				} else {
					c = mix(base, p.Wall, 0.35)
				}
			case d > TrackR+PaddleH+1:
				c = dark
			}
			o := 4 * (y*Width + x)
			bg[o], bg[o+1], bg[o+2], bg[o+3] = c.R, c.G, c.B, 255
			if x < farCols {
				if fy >= Top && fy <= Bottom {
					c = dark
				}
				o := 4 * (y*farCols + x)
				gate[o], gate[o+1], gate[o+2], gate[o+3] = c.R, c.G, c.B, 255
			}
		}
	}
	return bg, gate
}

// lift brightens c by up to n levels per channel.
func lift(c color.RGBA, n float64) color.RGBA {
	l := func(x uint8) uint8 { return uint8(math.Min(255, math.Round(float64(x)+n))) }
	return color.RGBA{l(c.R), l(c.G), l(c.B), 255}
}

func mix(a, b color.RGBA, t float64) color.RGBA {
	l := func(x, y uint8) uint8 { return uint8(math.Round(float64(x) + (float64(y)-float64(x))*t)) }
	return color.RGBA{l(a.R, b.R), l(a.G, b.G), l(a.B, b.B), 255}
}

// Expert returns the level-keeping expert bound to this game.
func (g *Game) Expert() games.Expert { return g.expert }

// floorsOf returns the measured baseline returns of the default game
// (docs/games.md); other variations are not measured.
func floorsOf(variation string) games.Floors {
	if variation != "" {
		return games.Floors{}
	}
	return DefaultFloors
}

// DefaultFloors are the mean returns of the idle ("stay") and the
// uniformly random policies on the default game over held-out episodes
// 0–199, as TestFloors measures them.
var DefaultFloors = games.Floors{Idle: -22.83, Random: -21.97}

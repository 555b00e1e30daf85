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

// Field geometry in pixels (the frame is the field, 84×84). Walls close
// the left, right and top; the paddle slides along PaddleY near the open
// bottom.
const (
	Size      = 84
	Rim       = 3.0           // wall thickness
	Left      = Rim           // inner face of the left wall
	Right     = Size - Rim    // inner face of the right wall
	Top       = Rim           // inner face of the top wall
	PaddleY   = 75.0          // top face of the paddle
	PaddleH   = 3.0           // paddle thickness
	Bottom    = float64(Size) // a ball wholly below this is missed
	serveY    = 16.0          // height balls are served from
	serveHalf = 22.0          // serve x in Size/2 ± serveHalf
	obstacleY = 33.0          // top of the moving obstacle
	obstacleH = 3.0           // its thickness
	obstacleW = 18.0          // its length
	obstacleV = 0.45          // its speed, pixels per step
	maxEvents = 16            // collisions handled within one step
	serveTilt = 0.6           // largest serve angle from vertical (rad)
	ringGap   = 9.0           // spacing of the background's arcs
	ringX     = float64(Size) / 2
	ringCY    = -10.0
)

// Palette is the set of colours the game is drawn with.
type Palette struct {
	// Name is the palette's variation name.
	Name string
	// TopLeft, TopRight, BottomLeft and BottomRight are the field's colours
	// at its corners; the background blends between them, so every part of
	// the field, walls and pit included, shows by its colour where it is.
	TopLeft, TopRight, BottomLeft, BottomRight color.RGBA
	// Wall tints the walls (mixed into the field's colour there), WallLit
	// their inner edge.
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
	// PaddleHalf is half the paddle's length in pixels. Default 7.
	PaddleHalf float64
	// PaddleSpeed is how far the paddle moves per step at full deflection
	// (pixels). Default 2.6.
	PaddleSpeed float64
	// StartSpeed is the ball's speed at each serve (pixels per step),
	// SpeedUp multiplies it at each return, up to MaxSpeed. Defaults 1.5,
	// 1.04, 3.2.
	StartSpeed, SpeedUp, MaxSpeed float64
	// MaxAngle is the largest angle from vertical a ball leaves the paddle
	// at (hit at the very end), radians. Default 1.0.
	MaxAngle float64
	// Obstacle adds a bar drifting across the upper field.
	Obstacle bool
	// Analog makes the action one continuous value in [−1,1] (paddle
	// velocity as a fraction of PaddleSpeed) instead of left/stay/right.
	Analog bool
	// MissLimit ends the episode (Failed) at this many misses. Default 5.
	MissLimit int
	// MaxSteps is the step limit. Default 2000.
	MaxSteps int
}

// DefaultConfig is the training setup.
func DefaultConfig() Config {
	return Config{Palette: Palettes[0], BallRadius: 1.6, PaddleHalf: 7, PaddleSpeed: 2.6,
		StartSpeed: 1.5, SpeedUp: 1.04, MaxSpeed: 3.2, MaxAngle: 1.0, MissLimit: 5, MaxSteps: 2000}
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
	vary("short", "paddle 9 px long instead of 14", "paddle", func(c *Config) { c.PaddleHalf = 4.5 }),
	vary("long", "paddle 20 px long", "paddle", func(c *Config) { c.PaddleHalf = 10 }),
	vary("brisk", "faster ball: serve 2.1, top speed 3.8 px/step", "speed", func(c *Config) { c.StartSpeed, c.MaxSpeed = 2.1, 3.8 }),
	vary("drifter", "a bar drifting across the upper field deflects the ball", "obstacle", func(c *Config) { c.Obstacle = true }),
	vary("analog", "continuous paddle velocity in [−1,1] instead of left/stay/right", "action", func(c *Config) { c.Analog = true }),
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
	cfg       Config
	spec      games.Spec
	bg        []byte // the static background frame, RGBA
	rng       *rand.Rand
	ball      Ball
	paddleX   float64 // paddle centre
	obsX      float64 // obstacle left end
	obsV      float64
	returns   int
	misses    int
	steps     int
	done      bool
	reason    games.EndReason
	expert    *Expert
	events    [maxEvents]Event
	numEvents int
}

// Ball is the ball's state: centre (pixels, y down) and velocity (pixels
// per step).
type Ball struct {
	X, Y, VX, VY float64
}

// Speed is the length of the velocity.
func (b Ball) Speed() float64 { return math.Hypot(b.VX, b.VY) }

// EventKind says what the ball hit.
type EventKind int

// Kinds of collision.
const (
	HitLeft EventKind = iota
	HitRight
	HitTop
	HitPaddle
	HitObstacle
	HitFloor // only in closed-box tests

	// hitObstacleFace is HitObstacle on the bar's top or bottom face
	// (VY flips); reported as HitObstacle.
	hitObstacleFace EventKind = 100
)

// Event is one collision inside a step: the ball's state just before and
// just after it, and the fraction of the step at which it happened.
type Event struct {
	Kind          EventKind
	At            float64
	Before, After Ball
}

func init() {
	games.Register(Name, Variations.Names(), func(o games.Options) (games.Game, error) { return New(o) })
}

// New builds the paddle game. The field is always 84×84: other frame
// sizes are refused.
func New(o games.Options) (*Game, error) {
	cfg, canon, err := ParseVariation(o.Variation)
	if err != nil {
		return nil, err
	}
	if (o.Width != 0 && o.Width != Size) || (o.Height != 0 && o.Height != Size) {
		return nil, fmt.Errorf("paddle: frame %dx%d: the field is fixed at %dx%d", o.Width, o.Height, Size, Size)
	}
	return NewConfig(cfg, canon)
}

// NewConfig builds the game from a resolved config; variation is only
// reported in Spec.
func NewConfig(cfg Config, variation string) (*Game, error) {
	switch {
	case cfg.BallRadius <= 0 || cfg.BallRadius > 6:
		return nil, fmt.Errorf("paddle: ball radius %v: want (0, 6]", cfg.BallRadius)
	case cfg.PaddleHalf <= 1 || cfg.PaddleHalf > 30:
		return nil, fmt.Errorf("paddle: paddle half-length %v: want (1, 30]", cfg.PaddleHalf)
	case cfg.PaddleSpeed <= 0 || cfg.StartSpeed <= 0 || cfg.MaxSpeed < cfg.StartSpeed || cfg.MaxSpeed > 8 || cfg.SpeedUp < 1:
		return nil, fmt.Errorf("paddle: speeds (paddle %v, ball %v..%v ×%v) out of range", cfg.PaddleSpeed, cfg.StartSpeed, cfg.MaxSpeed, cfg.SpeedUp)
	case cfg.MaxAngle <= 0 || cfg.MaxAngle >= 1.3:
		return nil, fmt.Errorf("paddle: max angle %v: want (0, 1.3) rad", cfg.MaxAngle)
	case cfg.MissLimit < 1 || cfg.MaxSteps < 1:
		return nil, fmt.Errorf("paddle: miss limit %d and step limit %d must be positive", cfg.MissLimit, cfg.MaxSteps)
	}
	g := &Game{cfg: cfg, rng: seeds.NewRand(0)}
	act := games.ActionSpace{Kind: games.Discrete, Names: []string{"left", "stay", "right"}}
	if cfg.Analog {
		act = games.ActionSpace{Kind: games.Continuous, Names: []string{"velocity"}, Low: []float64{-1}, High: []float64{1}}
	}
	g.spec = games.Spec{Name: Name, Variation: variation, Width: Size, Height: Size, Action: act, MaxSteps: cfg.MaxSteps}
	g.bg = background(cfg.Palette)
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

// PaddleX is the paddle's centre.
func (g *Game) PaddleX() float64 { return g.paddleX }

// Returns and Misses count this episode's returned and missed balls.
func (g *Game) Returns() int { return g.returns }

// Misses counts this episode's missed balls.
func (g *Game) Misses() int { return g.misses }

// Events returns the collisions of the last step (valid until the next).
func (g *Game) Events() []Event { return g.events[:g.numEvents] }

// Reset starts an episode: paddle centred, obstacle (if any) at a seeded
// place, and the first serve drawn from the seed's "serve" stream.
func (g *Game) Reset(seed uint64) {
	g.rng = seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("serve")))
	g.paddleX = Size / 2
	g.obsX = Left + (Right-Left-obstacleW)*g.rng.Float64()
	g.obsV = obstacleV
	if g.rng.IntN(2) == 0 {
		g.obsV = -obstacleV
	}
	g.returns, g.misses, g.steps = 0, 0, 0
	g.done, g.reason = false, games.NotEnded
	g.numEvents = 0
	g.serve()
}

// serve puts a new ball above the middle, heading down at a random tilt,
// at the starting speed.
func (g *Game) serve() {
	x := Size/2 + serveHalf*(2*g.rng.Float64()-1)
	a := serveTilt * (2*g.rng.Float64() - 1)
	s := g.cfg.StartSpeed
	g.ball = Ball{X: x, Y: serveY, VX: s * math.Sin(a), VY: s * math.Cos(a)}
}

// Step moves the paddle by the action (discrete: 0 left, 1 stay, 2 right;
// analog: velocity in [−1,1], clamped), the obstacle, then the ball for
// one step, resolving every collision inside the step in time order.
// After the episode has ended it changes nothing and reports the end
// again with zero reward.
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
	hw := g.cfg.PaddleHalf
	g.paddleX = math.Max(Left+hw, math.Min(Right-hw, g.paddleX+move*g.cfg.PaddleSpeed))
	if g.cfg.Obstacle {
		g.moveObstacle()
	}
	reward := 0.0
	g.numEvents = 0
	hits := g.advance(1, false)
	reward += float64(hits)
	if g.ball.Y-g.cfg.BallRadius > Bottom {
		g.misses++
		reward--
		g.serve()
	}
	g.steps++
	switch {
	case g.misses >= g.cfg.MissLimit:
		g.done, g.reason = true, games.Failed
	case g.steps >= g.cfg.MaxSteps:
		g.done, g.reason = true, games.TimeUp
	}
	return games.Step{Reward: reward, Done: g.done, Reason: g.reason}, nil
}

func (g *Game) moveObstacle() {
	g.obsX += g.obsV
	if g.obsX < Left {
		g.obsX, g.obsV = 2*Left-g.obsX, -g.obsV
	} else if g.obsX+obstacleW > Right {
		g.obsX, g.obsV = 2*(Right-obstacleW)-g.obsX, -g.obsV
	}
	// If the bar moved into the ball, push the ball out through the
	// nearest face that leaves it room inside the walls, and send it away
	// from the bar along that axis.
	b := &g.ball
	r := g.cfg.BallRadius
	x0, x1 := g.obsX-r, g.obsX+obstacleW+r
	y0, y1 := obstacleY-r, obstacleY+obstacleH+r
	if b.X <= x0 || b.X >= x1 || b.Y <= y0 || b.Y >= y1 {
		return
	}
	best, face := math.Inf(1), -1
	for f, d := range [4]float64{b.X - x0, x1 - b.X, b.Y - y0, y1 - b.Y} {
		room := (f == 0 && x0 >= Left+r) || (f == 1 && x1 <= Right-r) || (f == 2 && y0 >= Top+r) || f == 3
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

// advance moves the ball for tau steps of time, reflecting it off the
// walls (law of reflection: the velocity component along the wall's normal
// changes sign, the other is kept, so the speed is kept), the obstacle and
// the paddle. With floor it also reflects off a wall at Bottom (tests).
// It records the collisions and returns the number of paddle returns.
func (g *Game) advance(tau float64, floor bool) int {
	b := &g.ball
	r := g.cfg.BallRadius
	returns := 0
	for n := 0; n < maxEvents && tau > 0; n++ {
		t, kind := tau, EventKind(-1)
		try := func(dt float64, k EventKind) {
			if dt >= 0 && dt < t {
				t, kind = dt, k
			}
		}
		if b.VX < 0 {
			try((Left+r-b.X)/b.VX, HitLeft)
		} else if b.VX > 0 {
			try((Right-r-b.X)/b.VX, HitRight)
		}
		if b.VY < 0 {
			try((Top+r-b.Y)/b.VY, HitTop)
		} else if b.VY > 0 {
			if b.Y+r <= PaddleY+1e-9 {
				if dt := (PaddleY - r - b.Y) / b.VY; dt >= 0 && dt < t {
					x := b.X + b.VX*dt
					if math.Abs(x-g.paddleX) <= g.cfg.PaddleHalf+r {
						t, kind = dt, HitPaddle
					}
				}
			}
			if floor {
				try((Bottom-r-b.Y)/b.VY, HitFloor)
			}
		}
		if g.cfg.Obstacle {
			if dt, vertical, ok := g.obstacleHit(r); ok && dt < t {
				t = dt
				kind = HitObstacle
				if vertical {
					kind = hitObstacleFace
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
		case HitLeft, HitRight:
			b.VX = -b.VX
		case HitTop, HitFloor:
			b.VY = -b.VY
		case HitObstacle:
			b.VX = -b.VX
		case hitObstacleFace:
			ev.Kind = HitObstacle
			b.VY = -b.VY
		case HitPaddle:
			returns++
			g.returns++
			off := (b.X - g.paddleX) / (g.cfg.PaddleHalf + r)
			off = math.Max(-1, math.Min(1, off))
			a := off * g.cfg.MaxAngle
			s := math.Min(g.cfg.MaxSpeed, b.Speed()*g.cfg.SpeedUp)
			b.VX, b.VY = s*math.Sin(a), -s*math.Cos(a)
		}
		ev.After = *b
		if g.numEvents < maxEvents {
			g.events[g.numEvents] = ev
			g.numEvents++
		}
	}
	return returns
}

// obstacleHit is the slab test of the ball's centre against the obstacle
// grown by the ball's radius. It returns the entry time, whether the face
// entered is horizontal (top or bottom, so VY flips), and whether the ball
// enters within the coming step at all.
func (g *Game) obstacleHit(r float64) (float64, bool, bool) {
	b := g.ball
	x0, x1 := g.obsX-r, g.obsX+obstacleW+r
	y0, y1 := obstacleY-r, obstacleY+obstacleH+r
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

// Render copies the static field into dst and draws the obstacle, the
// paddle and the ball with soft edges. It does not allocate. A dst of
// another size than 84×84 is left untouched.
func (g *Game) Render(dst *image.RGBA) {
	if dst.Rect.Dx() != Size || dst.Rect.Dy() != Size {
		return
	}
	if dst.Stride == 4*Size && len(dst.Pix) >= len(g.bg) {
		copy(dst.Pix, g.bg)
	} else {
		for row := 0; row < Size; row++ {
			copy(dst.Pix[row*dst.Stride:row*dst.Stride+4*Size], g.bg[row*4*Size:(row+1)*4*Size])
		}
	}
	p := g.cfg.Palette
	if g.cfg.Obstacle {
		h := obstacleH / 2
		capsule(dst, g.obsX+h, obstacleY+h, g.obsX+obstacleW-h, h, p.Obstacle)
	}
	h := PaddleH / 2
	capsule(dst, g.paddleX-g.cfg.PaddleHalf+h, PaddleY+h, g.paddleX+g.cfg.PaddleHalf-h, h, p.Paddle)
	capsule(dst, g.ball.X, g.ball.Y, g.ball.X, g.cfg.BallRadius, p.Ball)
}

// capsule blends c into dst over the points within rad of the horizontal
// segment from (x0, y) to (x1, y), with a one-pixel soft edge (coverage
// rad + ½ − distance, clamped to [0,1]).
func capsule(dst *image.RGBA, x0, y, x1, rad float64, c color.RGBA) {
	cx0 := int(math.Floor(x0 - rad - 1))
	cx1 := int(math.Ceil(x1 + rad + 1))
	cy0 := int(math.Floor(y - rad - 1))
	cy1 := int(math.Ceil(y + rad + 1))
	// Squared distances beyond outer2 get no coverage, within inner2 full
	// coverage; only the one-pixel rim in between needs the square root.
	outer2 := (rad + 0.5) * (rad + 0.5)
	inner2 := 0.0
	if rad > 0.5 {
		inner2 = (rad - 0.5) * (rad - 0.5)
	}
	cx0, cy0 = max(cx0, 0), max(cy0, 0)
	cx1, cy1 = min(cx1, Size-1), min(cy1, Size-1)
	for py := cy0; py <= cy1; py++ {
		fy := float64(py) + 0.5 - y
		for px := cx0; px <= cx1; px++ {
			fx := float64(px) + 0.5
			dx := 0.0
			if fx < x0 {
				dx = x0 - fx
			} else if fx > x1 {
				dx = fx - x1
			}
			d2 := dx*dx + fy*fy
			if d2 >= outer2 {
				continue
			}
			o := py*dst.Stride + 4*px
			pix := dst.Pix[o : o+3 : o+3]
			if d2 <= inner2 {
				pix[0], pix[1], pix[2] = c.R, c.G, c.B
				continue
			}
			cov := rad + 0.5 - math.Sqrt(d2)
			if cov <= 0 {
				continue
			}
			if cov >= 1 {
				pix[0], pix[1], pix[2] = c.R, c.G, c.B
				continue
			}
			a := uint32(cov * 256)
			pix[0] = uint8((uint32(pix[0])*(256-a) + uint32(c.R)*a) >> 8)
			pix[1] = uint8((uint32(pix[1])*(256-a) + uint32(c.G)*a) >> 8)
			pix[2] = uint8((uint32(pix[2])*(256-a) + uint32(c.B)*a) >> 8)
		}
	}
}

// background draws the static field once: a blend between the four
// corner colours crossed by faint lighter arcs centred above the field,
// the pit below the paddle line in a darker shade of the same blend, and
// the three walls tinted over it with a lit inner edge. Walls and pit keep
// the blend underneath, so no part of the frame stands out but the moving
// pieces.
func background(p Palette) []byte {
	bg := make([]byte, 4*Size*Size)
	for y := 0; y < Size; y++ {
		for x := 0; x < Size; x++ {
			fx, fy := float64(x)+0.5, float64(y)+0.5
			u, v := fx/Size, fy/Size
			c := mix(mix(p.TopLeft, p.TopRight, u), mix(p.BottomLeft, p.BottomRight, u), v)
			d := math.Hypot(fx-ringX, fy-ringCY)
			m := math.Mod(d, ringGap)
			if w := 1 - math.Abs(m-ringGap/2)/0.9; w > 0 {
				c = lift(c, 16*w)
			}
			switch {
			case fy > PaddleY+PaddleH+1:
				c = mix(c, rgb(0, 0, 0), 0.45)
			case fx < Left || fx > Right || fy < Top:
				lit := (fx >= Left-1 && fx < Left || fx > Right && fx <= Right+1) && fy >= Top-1 ||
					fy >= Top-1 && fx >= Left-1 && fx <= Right+1
				if lit {
					c = mix(c, p.WallLit, 0.5)
				} else {
					c = mix(c, p.Wall, 0.35)
				}
			}
			o := 4 * (y*Size + x)
			bg[o], bg[o+1], bg[o+2], bg[o+3] = c.R, c.G, c.B, 255
		}
	}
	return bg
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

// Expert returns the ball-tracking expert bound to this game.
func (g *Game) Expert() games.Expert { return g.expert }

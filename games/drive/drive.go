package drive

import (
	"encoding/binary"
	"fmt"
	"image"
	"math"

	"tilebench/games"
)

// Name is the registered name of the driving game.
const Name = "drive"

// Game constants.
const (
	// DT is the fixed time step in seconds.
	DT = 0.05
	// TimeLimit is the length of an episode in simulated seconds; an
	// episode that neither finishes its lap nor fails ends then.
	TimeLimit = 45.0
	// OffRoadPenalty is subtracted from the reward for every simulated
	// second the car's centre spends off the road (metres of progress per
	// second).
	OffRoadPenalty = 4.0
	// OffRoadAllowance is how many simulated seconds in all, over the
	// episode, the car's centre may spend off the road; beyond it the
	// episode fails.
	OffRoadAllowance = 3.0
	// ViewMetres is the width of ground the frame shows, in metres.
	ViewMetres = 64.0
	// ViewLead is how far ahead of the car's centre the frame's centre
	// lies, in metres: the car's nose (2.1 m ahead of its centre) sits
	// just short of the frame's centre, so the car falls in the middle
	// tokens of every patch grid, and the view reaches 23 m ahead against
	// 17 m behind: a little more of the road to come than of the road
	// driven.
	ViewLead = 3.0
	// DefaultWidth and DefaultHeight are the default frame size in
	// pixels: a landscape frame, since on a circuit of bends the road
	// swings sideways out of a view that turns with the car sooner than
	// it runs out ahead.
	DefaultWidth, DefaultHeight = 112, 80
)

// MaxSteps is the step limit of one episode: TimeLimit / DT.
const MaxSteps = int(TimeLimit / DT)

// offRoadSteps is OffRoadAllowance in steps.
const offRoadSteps = int(OffRoadAllowance / DT)

// Config is a fully resolved game setup. Variations are named edits of
// the default Config.
type Config struct {
	// Palette is the look.
	Palette Palette
	// Track shapes the circuit (its Width is the mean road width).
	Track TrackConfig
	// Car holds the car's constants.
	Car CarParams
	// Shapes is the number of distractor shapes scattered on the terrain
	// (default 0).
	Shapes int
	// Noise is the strength of the terrain texture in [0,1] (default 0).
	Noise float64
	// EdgeWidth is the width of the edge bands in metres (default 0.8).
	EdgeWidth float64
	// Width and Height are the frame size (default 112×80).
	Width, Height int
}

func vary(name, doc, group string, edit func(*Config)) games.Variation[Config] {
	return games.Variation[Config]{Name: name, Doc: doc, Group: group, Edit: edit}
}

// Variations are the named edits of DefaultConfig.
var Variations = games.VariationSet[Config]{
	vary("tarn", "held-out palette: slate ground, lavender road, coral edges", "palette", func(c *Config) { c.Palette = Palettes[1] }),
	vary("ochre", "held-out palette: ochre ground, deep teal road, cream edges", "palette", func(c *Config) { c.Palette = Palettes[2] }),
	vary("cinder", "held-out palette: indigo ground, rust road, gold edges", "palette", func(c *Config) { c.Palette = Palettes[3] }),
	vary("narrow", "road 6.5 m wide on average instead of 9 m", "road", func(c *Config) { c.Track.Width = 6.5 }),
	vary("broad", "road 12 m wide on average instead of 9 m", "road", func(c *Config) { c.Track.Width = 12 }),
	vary("twisty", "harder circuits: 7 or 8 bends, two of them turning the other way, radii 16–28 m, shorter straights, the width swinging ±30%", "circuit", func(c *Config) {
		c.Track.Bends, c.Track.Reverse, c.Track.MaxRadius, c.Track.WidthSwing, c.Track.MaxStraight = 7, 2, 28, 0.3, 24
	}),
	vary("clutter", "160 distractor shapes scattered on the terrain", "shapes", func(c *Config) { c.Shapes = 160 }),
	vary("grain", "textured terrain (value noise)", "texture", func(c *Config) { c.Noise = 1 }),
	vary("small", "64×48 frames", "frame size", func(c *Config) { c.Width, c.Height = 64, 48 }),
	vary("large", "160×112 frames", "frame size", func(c *Config) { c.Width, c.Height = 160, 112 }),
}

// DefaultConfig is the training setup.
func DefaultConfig() Config {
	return Config{Palette: Palettes[0], EdgeWidth: 0.8, Width: DefaultWidth, Height: DefaultHeight}
}

// ParseVariation applies a variation string (see Variations; names
// joined with "+") to the default config and returns it with the
// canonical spelling.
func ParseVariation(s string) (Config, string, error) {
	c := DefaultConfig()
	canon, err := Variations.Apply(Name, s, &c)
	return c, canon, err
}

// Game is the driving game. Build it with New or games.Build("drive", ...).
type Game struct {
	cfg       Config
	variation string
	spec      games.Spec
	track     *Track
	world     *world
	car       Car
	idx       int     // centreline sample nearest the car
	s         float64 // arc length of the car's centre
	lateral   float64 // signed offset of the car's centre from the centreline
	progress  float64 // metres of progress this episode
	steps     int
	offSteps  int // steps off the road this episode
	done      bool
	reason    games.EndReason
	sprite    []spritePx
	expert    *Expert
	frameView viewGeom
	trackErr  error
	episode   uint64 // counts Resets, from 1
}

type spritePx struct {
	off      int // byte offset in a frame with stride 4·Width
	c        uint32
	alpha    uint32 // 0..256
	row, col int32  // the frame pixel
	// For drawSprite: the colour's red and blue bytes (bits 0–7 and
	// 16–23) and its green byte (bits 8–15), each times alpha, and
	// 256 − alpha.
	rb, g, keep uint32
}

type viewGeom struct {
	ppm    float64 // frame pixels per metre
	ax, ay float64 // car centre in frame pixels
}

func init() {
	games.Provide(Name, Variations.Names(), func(o games.Setup) (games.Game, error) { return New(o) })
}

// New builds the driving game for o (variation, frame size).
func New(o games.Setup) (*Game, error) {
	cfg, canon, err := ParseVariation(o.Variation)
	if err != nil {
		return nil, err
	}
	if o.Width != 0 {
		cfg.Width = o.Width
	}
	if o.Height != 0 {
		cfg.Height = o.Height
	}
	return NewConfig(cfg, canon)
}

// NewConfig builds the game from a resolved config; variation is only
// reported in Spec.
func NewConfig(cfg Config, variation string) (*Game, error) {
	if cfg.Width < 16 || cfg.Height < 16 || cfg.Width > 256 || cfg.Height > 256 {
		return nil, fmt.Errorf("drive: frame %dx%d: want 16..256 pixels a side", cfg.Width, cfg.Height)
	}
	if cfg.Noise < 0 || cfg.Noise > 1 || cfg.Shapes < 0 || cfg.Shapes > 2000 || cfg.EdgeWidth < 0 || cfg.EdgeWidth > 4 {
		return nil, fmt.Errorf("drive: noise %v, shapes %d, edge %v out of range", cfg.Noise, cfg.Shapes, cfg.EdgeWidth)
	}
	cfg.Track = cfg.Track.withDefaults()
	if err := cfg.Track.check(); err != nil {
		return nil, fmt.Errorf("drive: %w", err)
	}
	cfg.Car = cfg.Car.withDefaults()
	g := &Game{cfg: cfg, variation: variation, track: &Track{}}
	g.spec = games.Spec{
		Name: Name, Variation: variation, Width: cfg.Width, Height: cfg.Height,
		Action: games.Controls{
			Kind:  games.Continuous,
			Names: []string{"steering", "pedal"},
			Low:   []float64{-1, -1},
			High:  []float64{1, 1},
		},
		StepLimit: MaxSteps,
		Floors:    floors,
	}
	ppm := float64(cfg.Width) / ViewMetres
	g.frameView = viewGeom{ppm: ppm, ax: float64(cfg.Width) / 2, ay: float64(cfg.Height)/2 + ViewLead*ppm}
	look := worldLook{pal: cfg.Palette, shapes: cfg.Shapes, noise: cfg.Noise, edgeWidth: cfg.EdgeWidth}
	g.world = newWorld(look, ppm, cfg.Track.Extent)
	g.buildSprite()
	g.expert = &Expert{g: g}
	g.Reset(games.HeldOut(0))
	if g.trackErr != nil {
		return nil, g.trackErr
	}
	return g, nil
}

// Spec describes the game.
func (g *Game) Spec() games.Spec { return g.spec }

// Config returns the resolved configuration.
func (g *Game) Config() Config { return g.cfg }

// Track returns the current episode's circuit. It is reused by the next
// Reset.
func (g *Game) Track() *Track { return g.track }

// Car returns the car's current state.
func (g *Game) Car() Car { return g.car }

// Progress is the centreline distance driven this episode, in metres.
func (g *Game) Progress() float64 { return g.progress }

// Lateral is the signed offset of the car's centre from the centreline
// (positive left), in metres.
func (g *Game) Lateral() float64 { return g.lateral }

// OnRoad reports whether the car's centre is on the road.
func (g *Game) OnRoad() bool { return math.Abs(g.lateral) <= g.track.Half[g.idx] }

// Reset starts the episode for seed: generates the circuit, clears the
// last episode's road from the world image (the new road is drawn when a
// frame first needs it) and puts the car at rest on the start line,
// facing along the road.
func (g *Game) Reset(seed uint64) {
	if err := g.track.Generate(seed, g.cfg.Track); err != nil {
		// Only reachable with extreme configs; NewConfig reports it.
		g.trackErr = err
		g.track.fallback(g.cfg.Track)
	}
	tr := g.track
	g.episode++
	g.world.reset(tr, seed)
	g.car = NewCar(g.cfg.Car)
	g.car.Heading = tr.Heading()
	h := g.car.P.Wheelbase / 2
	g.car.Pos = Vec{tr.Start.X - h*math.Cos(g.car.Heading), tr.Start.Y - h*math.Sin(g.car.Heading)}
	g.idx, g.s, g.lateral = tr.Project(g.car.Centre(), 0, 0)
	g.progress = 0
	g.steps, g.offSteps = 0, 0
	g.done, g.reason = false, games.NotEnded
}

func clamp(v, lo, hi float64) float64 {
	if v < lo {
		return lo
	}
	if v > hi {
		return hi
	}
	return v
}

// Step applies steering and pedal (clamped to [−1,1]; a positive pedal
// drives, a negative one brakes) for one time step of DT seconds. The
// reward is the signed centreline progress in metres, less
// OffRoadPenalty·DT if the car's centre is off the road after the step.
// After the episode has ended Step changes nothing and reports the end
// again with zero reward.
func (g *Game) Step(action []float64) (games.Step, error) {
	if err := g.spec.Action.Check(action); err != nil {
		return games.Step{}, fmt.Errorf("drive: %w", err)
	}
	if g.done {
		return games.Step{Done: true, Reason: g.reason}, nil
	}
	steer := clamp(action[0], -1, 1)
	pedal := clamp(action[1], -1, 1)
	g.car.Advance(steer, pedal, DT)
	idx, s, lat := g.track.Project(g.car.Centre(), g.idx, 24)
	ds := s - g.s
	L := g.track.Length
	if ds > L/2 {
		ds -= L
	} else if ds < -L/2 {
		ds += L
	}
	g.idx, g.s, g.lateral = idx, s, lat
	g.progress += ds
	g.steps++
	reward := ds
	if math.Abs(lat) > g.track.Half[idx] {
		g.offSteps++
		reward -= OffRoadPenalty * DT
	}
	switch {
	case g.progress >= L:
		g.done, g.reason = true, games.Completed
	case g.offSteps > offRoadSteps:
		g.done, g.reason = true, games.Failed
	case g.steps >= MaxSteps:
		g.done, g.reason = true, games.TimeUp
	}
	return games.Step{Reward: reward, Done: g.done, Reason: g.reason}, nil
}

// Render draws the view that turns with the car, its centre ViewLead
// metres ahead of the car, into dst by sampling the world image (nearest
// neighbour, one fixed-point rotation per frame; on amd64 with AVX2 or
// AVX-512, 8 or 16 samples a step with gathers, the same pixels as the
// plain-Go sampler), then the car sprite. Stretches of road the frame
// reaches for the first time this episode are drawn into the world image
// first. It does not allocate. A dst of another size than the game's
// frame is left untouched.
func (g *Game) Render(dst *image.RGBA) {
	W, H := g.cfg.Width, g.cfg.Height
	if dst.Rect.Dx() != W || dst.Rect.Dy() != H {
		return
	}
	wd := g.world
	v := g.frameView
	c := g.car.Centre()
	cs, sn := math.Cos(g.car.Heading), math.Sin(g.car.Heading)
	// Frame pixel (col, row) centre → car frame: forward = (ay−row−½)/ppm,
	// left = (ax−col−½)/ppm → world = c + forward·(cs,sn) + left·(−sn,cs)
	// → world pixel u = (X−minX)·wppm, v = (maxY−Y)·wppm.
	k := wd.ppm / v.ppm
	// d/dcol: left decreases by 1/ppm → world moves by −(−sn,cs)/ppm.
	duc, dvc := sn*k, cs*k
	// d/drow: forward decreases by 1/ppm → world moves by −(cs,sn)/ppm.
	dur, dvr := -cs*k, sn*k
	f0, l0 := (v.ay-0.5)/v.ppm, (v.ax-0.5)/v.ppm
	x0 := c.X + f0*cs - l0*sn
	y0 := c.Y + f0*sn + l0*cs
	u0 := (x0 - wd.minX) * wd.ppm
	v0 := (wd.maxY - y0) * wd.ppm
	// Keep fixed-point values in range; a car this far out sees only
	// border anyway.
	if math.Abs(u0) > 20000 || math.Abs(v0) > 20000 {
		fillFrame(dst, wd.border)
		g.drawSprite(dst)
		return
	}
	// The frame's box in world pixels: draw the road there if need be.
	{
		uw, vh := float64(W)*duc, float64(W)*dvc
		ur, vr := float64(H)*dur, float64(H)*dvr
		lu := min(u0, u0+uw, u0+ur, u0+uw+ur)
		hu := max(u0, u0+uw, u0+ur, u0+uw+ur)
		lv := min(v0, v0+vh, v0+vr, v0+vh+vr)
		hv := max(v0, v0+vh, v0+vr, v0+vh+vr)
		wd.ensure(image.Rect(int(lu)-2, int(lv)-2, int(hu)+2, int(hv)+2), g.track)
	}
	// Sample at pixel centres: the +0.5 world pixel offset is implicit in
	// flooring the continuous coordinate.
	st := sampling{
		u: fix16(u0), v: fix16(v0),
		duc: fix16(duc), dvc: fix16(dvc), dur: fix16(dur), dvr: fix16(dvr),
	}
	wd.sample(dst.Pix, dst.Stride, W, H, st)
	g.drawSprite(dst)
}

func fillFrame(dst *image.RGBA, c uint32) {
	W, H := dst.Rect.Dx(), dst.Rect.Dy()
	for row := 0; row < H; row++ {
		line := dst.Pix[row*dst.Stride : row*dst.Stride+4*W]
		for o := 0; o < len(line); o += 4 {
			line[o], line[o+1], line[o+2], line[o+3] = uint8(c), uint8(c>>8), uint8(c>>16), 0xff
		}
	}
}

// buildSprite precomputes the car's pixels: the car is always at the same
// place in the frame, pointing up, so its shape never needs redrawing.
// Coverage comes from 4×4 supersampling of a rounded body with a cabin.
func (g *Game) buildSprite() {
	v := g.frameView
	p := g.cfg.Car
	hl, hw := p.Length/2, p.Width/2
	body, cabin := g.cfg.Palette.Body, g.cfg.Palette.Cabin
	r := int(math.Ceil(hl*v.ppm)) + 2
	g.sprite = g.sprite[:0]
	for row := int(v.ay) - r; row <= int(v.ay)+r; row++ {
		for col := int(v.ax) - r; col <= int(v.ax)+r; col++ {
			if row < 0 || col < 0 || row >= g.cfg.Height || col >= g.cfg.Width {
				continue
			}
			var nb, nc int
			for sy := 0; sy < 4; sy++ {
				for sx := 0; sx < 4; sx++ {
					fwd := (v.ay - (float64(row) + (float64(sy)+0.5)/4)) / v.ppm
					lft := (v.ax - (float64(col) + (float64(sx)+0.5)/4)) / v.ppm
					// Body: a rounded rectangle narrowing towards the nose.
					taper := hw
					if fwd > hl*0.4 {
						taper = hw * (1 - 0.35*(fwd-hl*0.4)/(hl*0.6))
					}
					if math.Abs(fwd) > hl || math.Abs(lft) > taper {
						continue
					}
					if fwd > -hl*0.15 && fwd < hl*0.35 && math.Abs(lft) < hw*0.7 {
						nc++
					} else {
						nb++
					}
				}
			}
			if nb+nc == 0 {
				continue
			}
			col0 := body
			if nc > nb {
				col0 = cabin
			}
			c, a := pack(col0), uint32((nb+nc)*16)
			g.sprite = append(g.sprite, spritePx{
				off: row*4*g.cfg.Width + 4*col, c: c, alpha: a, row: int32(row), col: int32(col),
				rb: (c & 0xff00ff) * a, g: (c & 0xff00) * a, keep: 256 - a,
			})
		}
	}
}

// drawSprite blends the car over the frame: each channel becomes
// (frame·(256−alpha) + car·alpha) >> 8, alpha left as it is. Red and blue
// are blended together in one word, green in another: each product sum
// is at most 255·256, so it fits its 16 bits and the lanes never carry
// into each other.
func (g *Game) drawSprite(dst *image.RGBA) {
	for _, s := range g.sprite {
		o := int(s.row)*dst.Stride + 4*int(s.col)
		px := dst.Pix[o : o+4 : o+4]
		w := binary.LittleEndian.Uint32(px)
		rb := ((w&0xff00ff)*s.keep + s.rb) >> 8 & 0xff00ff
		gr := ((w&0xff00)*s.keep + s.g) >> 8 & 0xff00
		binary.LittleEndian.PutUint32(px, rb|gr|w&0xff000000)
	}
}

// Expert returns the pure-pursuit expert bound to this game.
func (g *Game) Expert() games.Expert { return g.expert }

package watch

import (
	"bytes"
	"context"
	"encoding/base64"
	"encoding/json"
	"fmt"
	"image"
	"image/png"
	"math"
	"time"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/overlay"
)

// Snapshot is one step as the page shows it. Its images and slices belong
// to the game loop and are reused at the next step.
type Snapshot struct {
	// Episode counts episodes from 0; Seed is the episode's game seed;
	// Step the step index within the episode.
	Episode int
	Seed    uint64
	Step    int
	// Severity is the occlusion ratio in force; Spec the pipeline line.
	Severity float64
	Spec     string
	// Action is what the policy did; Return the episode's return so far
	// (after this step's reward); Done and Reason tell whether the
	// episode ended at this step.
	Action []float64
	Return float64
	Done   bool
	Reason string
	// Paused is true when the loop waits for the page.
	Paused bool
	// Raw is the game's frame; Seen the frame the policy saw (tokens
	// reassembled). RawHeat and SeenHeat carry the overlay: on Raw each
	// token's weight is drawn on the cell its content came from, on Seen
	// on the cell it sits in. HasWeights is false when the policy gave
	// none (then the heat images are plain copies).
	Raw, Seen, RawHeat, SeenHeat *image.RGBA
	HasWeights                   bool
	// RawCells and SeenCells are the weights per grid cell behind the
	// two overlays.
	RawCells, SeenCells []float32
}

// loop is the game loop's state; only its goroutine touches it.
type loop struct {
	cfg      *Config
	g        games.Game
	grid     *patch.Grid
	tok      *patch.Tokenizer
	pipe     *patch.Pipeline
	pol      vision.Policy
	rep      vision.AttentionReporter
	baseOcc  string
	sevOK    bool
	sev0     float64 // the severity at the start (read by the page handler)
	clean    *patch.TokenSet
	tokens   *patch.TokenSet
	rec      patch.FrameRecord
	obs      vision.Observation
	prev     []float64
	weights  []float32
	draw     overlay.Drawer
	snap     Snapshot
	maxSteps int
	started  bool
	// encoding
	enc  png.Encoder
	pngs [4]bytes.Buffer
}

func newLoop(cfg *Config) (*loop, error) {
	sp := cfg.Game.Spec()
	g := cfg.Grid
	if g.Width != sp.Width || g.Height != sp.Height {
		return nil, fmt.Errorf("watch: patch grid is for %dx%d frames, game %s renders %dx%d", g.Width, g.Height, sp.Name, sp.Width, sp.Height)
	}
	l := &loop{cfg: cfg, g: cfg.Game, grid: g, tok: patch.NewTokenizer(g), pol: cfg.Policy, baseOcc: cfg.Spec.Occlude}
	l.rep, _ = cfg.Policy.(vision.AttentionReporter)
	var sev float64
	_, sev, _, l.sevOK = severityOf(cfg.Spec.Occlude)
	pipe, err := patch.NewPipeline(g, cfg.Spec)
	if err != nil {
		return nil, fmt.Errorf("watch: %w", err)
	}
	l.pipe = pipe
	l.clean = patch.NewTokenSet(g.N(), g.D())
	l.tokens = patch.NewTokenSet(pipe.Capacity(), g.D())
	l.prev = make([]float64, sp.Action.Dim())
	l.weights = make([]float32, pipe.Capacity())
	l.obs = vision.Observation{Tokens: l.tokens, Grid: g, PrevAction: l.prev}
	l.maxSteps = sp.StepLimit
	s := &l.snap
	s.Seed = cfg.Seed
	s.Severity = sev
	l.sev0 = sev
	s.Spec = cfg.Spec.String()
	s.Action = make([]float64, sp.Action.Dim())
	s.Raw = image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	s.RawHeat = image.NewRGBA(s.Raw.Rect)
	s.Seen = image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
	s.SeenHeat = image.NewRGBA(s.Seen.Rect)
	s.RawCells = make([]float32, g.N())
	s.SeenCells = make([]float32, g.N())
	l.enc.CompressionLevel = png.BestSpeed
	return l, nil
}

// pipeSeed is the pipeline's and the policy's seed for a game seed.
func pipeSeed(seed uint64) uint64 { return patch.DeriveSeed(seed, patch.StreamKey("watch")) }

// begin starts an episode from seed.
func (l *loop) begin(seed uint64) {
	l.g.Reset(seed)
	l.pipe.Reset(pipeSeed(seed))
	l.pol.Reset(pipeSeed(seed))
	clear(l.prev)
	s := &l.snap
	if l.started {
		s.Episode++
	}
	l.started = true
	s.Seed, s.Step, s.Return, s.Done, s.Reason = seed, -1, 0, false, ""
}

// setSeverity rebuilds the pipeline with occlusion ratio r, keeping the
// episode's seed so that the rest of the episode is as if it had started
// with r.
func (l *loop) setSeverity(r float64) error {
	if !l.sevOK {
		return nil
	}
	spec := l.cfg.Spec
	spec.Occlude = withSeverity(l.baseOcc, r)
	pipe, err := patch.NewPipeline(l.grid, spec)
	if err != nil {
		return fmt.Errorf("watch: severity %v: %w", r, err)
	}
	if pipe.Capacity() != l.pipe.Capacity() {
		return fmt.Errorf("watch: severity %v changes the token capacity", r)
	}
	pipe.Reset(pipeSeed(l.snap.Seed))
	l.pipe = pipe
	l.snap.Severity = r
	l.snap.Spec = spec.String()
	return nil
}

// step plays one step and fills the snapshot.
func (l *loop) step() error {
	s := &l.snap
	t := s.Step + 1
	l.g.Render(s.Raw)
	if err := l.pipe.TokenizeFrame(t, l.tok, s.Raw, l.clean); err != nil {
		return fmt.Errorf("step %d: %w", t, err)
	}
	if err := l.pipe.Apply(t, l.clean, l.tokens, &l.rec); err != nil {
		return fmt.Errorf("step %d: %w", t, err)
	}
	if err := l.tok.Assemble(l.tokens, s.Seen); err != nil {
		return fmt.Errorf("step %d: %w", t, err)
	}
	l.obs.Step = t
	l.obs.Frame = s.Seen
	if err := l.pol.Act(&l.obs, s.Action); err != nil {
		return fmt.Errorf("step %d: policy: %w", t, err)
	}
	l.paint()
	st, err := l.g.Step(s.Action)
	if err != nil {
		return fmt.Errorf("step %d: %w", t, err)
	}
	copy(l.prev, s.Action)
	s.Step = t
	s.Return += st.Reward
	s.Done = st.Done || l.maxSteps > 0 && t+1 >= 2*l.maxSteps
	if s.Done {
		s.Reason = st.Reason.String()
		if ender, ok := l.pol.(vision.EpisodeEnder); ok {
			if err := ender.End(s.Return, t+1); err != nil {
				return fmt.Errorf("episode end: policy: %w", err)
			}
		}
	}
	return nil
}

// paint draws the overlays of the last step.
func (l *loop) paint() {
	s := &l.snap
	copy(s.RawHeat.Pix, s.Raw.Pix)
	copy(s.SeenHeat.Pix, s.Seen.Pix)
	s.HasWeights = false
	if l.rep == nil {
		return
	}
	_, n, ok := l.rep.TokenWeights(l.weights, nil)
	if !ok || n != l.tokens.N {
		return
	}
	s.HasWeights = true
	w := l.weights[:n]
	overlay.SeenCells(s.SeenCells, w, l.tokens.Pos, l.grid)
	overlay.SourceCells(s.RawCells, w, l.tokens.Pos, &l.rec, l.grid)
	l.draw.Draw(s.SeenHeat, l.grid, s.SeenCells, l.cfg.Overlay)
	l.draw.Draw(s.RawHeat, l.grid, s.RawCells, l.cfg.Overlay)
}

// event is the JSON the page reads.
type event struct {
	Format     int       `json:"format"`
	Episode    int       `json:"episode"`
	Seed       string    `json:"seed"` // as text: beyond 2^53 JavaScript numbers lose digits
	Step       int       `json:"step"`
	Severity   float64   `json:"severity"`
	Spec       string    `json:"spec"`
	Action     []float64 `json:"action"`
	Return     float64   `json:"return"`
	Done       bool      `json:"done"`
	Reason     string    `json:"reason"`
	Paused     bool      `json:"paused"`
	HasWeights bool      `json:"has_weights"`
	Images     [4]string `json:"images"` // raw, seen, raw heat, seen heat (PNG data URLs)
}

// encode turns the snapshot into one server-sent event.
func (l *loop) encode() ([]byte, error) {
	s := &l.snap
	ev := event{Format: 1, Episode: s.Episode, Seed: fmt.Sprint(s.Seed), Step: s.Step, Severity: s.Severity,
		Spec: s.Spec, Action: s.Action, Return: s.Return, Done: s.Done, Reason: s.Reason, Paused: s.Paused, HasWeights: s.HasWeights}
	for i, img := range [4]*image.RGBA{s.Raw, s.Seen, s.RawHeat, s.SeenHeat} {
		b := &l.pngs[i]
		b.Reset()
		if err := l.enc.Encode(b, img); err != nil {
			return nil, err
		}
		ev.Images[i] = "data:image/png;base64," + base64.StdEncoding.EncodeToString(b.Bytes())
	}
	for i, a := range ev.Action {
		if math.IsNaN(a) || math.IsInf(a, 0) {
			ev.Action[i] = 0 // cannot happen: the game refused it already
		}
	}
	js, err := json.Marshal(ev)
	if err != nil {
		return nil, err
	}
	out := make([]byte, 0, len(js)+8)
	out = append(out, "data: "...)
	out = append(out, js...)
	return append(out, "\n\n"...), nil
}

// publish sends the snapshot to the browsers (if any) and the test hook.
func (l *loop) publish(h *hub) error {
	if h.count() == 0 {
		return nil
	}
	msg, err := l.encode()
	if err != nil {
		return fmt.Errorf("watch: encode frame: %w", err)
	}
	h.publish(msg)
	return nil
}

// run plays until ctx is done or a step fails, at cfg.FPS steps a second
// while running, one step per "step" command while paused.
func (l *loop) run(ctx context.Context, cmds <-chan command, h *hub) error {
	// Steps keep to a schedule, one every period: a step that comes late
	// (the machine was busy) is made up at once, so the rate holds on
	// average; after a long stall (or a pause) the schedule starts anew
	// rather than rushing through the backlog.
	period := time.Duration(float64(time.Second) / l.cfg.FPS)
	due := time.Now().Add(period)
	tick := time.NewTimer(period)
	defer tick.Stop()
	l.begin(l.cfg.Seed)
	next := l.cfg.Seed
	paused := false
	// resend repeats the latest frame now and then, so that a browser
	// that (re)connects while paused sees the current state.
	resend := time.NewTicker(time.Second)
	defer resend.Stop()
	for {
		doStep := false
		select {
		case <-ctx.Done():
			return ctx.Err()
		case now := <-tick.C:
			doStep = !paused
			due = due.Add(period)
			if now.Sub(due) > 5*period || paused {
				due = now.Add(period)
			}
			tick.Reset(max(0, time.Until(due)))
		case <-resend.C:
			if paused && l.snap.Step >= 0 {
				if err := l.publish(h); err != nil {
					return err
				}
			}
		case c := <-cmds:
			switch c.op {
			case "pause":
				paused = true
			case "resume":
				paused = false
			case "step":
				paused, doStep = true, true
			case "seed":
				next = c.seed
				l.begin(next)
			case "severity":
				if err := l.setSeverity(c.value); err != nil {
					return err
				}
			}
			l.snap.Paused = paused
			if !doStep && l.snap.Step >= 0 {
				if err := l.publish(h); err != nil {
					return err
				}
			}
		}
		if !doStep {
			continue
		}
		if l.snap.Done {
			if next == math.MaxUint64 {
				next = 0
			} else {
				next++
			}
			l.begin(next)
		}
		if err := l.step(); err != nil {
			return fmt.Errorf("watch: episode %d (seed %d): %w", l.snap.Episode, l.snap.Seed, err)
		}
		if l.cfg.OnStep != nil {
			l.cfg.OnStep(&l.snap)
		}
		if err := l.publish(h); err != nil {
			return err
		}
	}
}

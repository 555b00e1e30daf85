// Package invariance measures how much a policy's action changes when the
// token set it sees is presented in another order, has its cell contents
// scrambled, gains noise tokens or loses tokens.
//
// Frames come from a game played by its scripted expert (so that they look
// like the frames a working policy meets). For every frame the policy acts
// once on the clean token set (the baseline) and once on each perturbed
// set; the policy is Reset with the same seed before every Act, so that no
// state carries from one presentation to the next. The change of an action
// is the largest absolute difference over its dimensions; for a discrete
// game it is 1 if the choice changed and 0 if not.
//
// Families that declare themselves invariant (vision.Info.Invariant) must
// keep the permutation change within Config.Tol; Report.Pass says whether
// they did. For the other families the figures measure sensitivity and
// are not a failure.
package invariance

import (
	"errors"
	"fmt"
	"image"
	"math"
	"math/rand/v2"
	"slices"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
)

// DefaultTol is the largest permutation change allowed for an invariant
// family: float32 arithmetic summed in another order (the bound).
const DefaultTol = 1e-5

// Config sets up a measurement. The zero value is useful.
type Config struct {
	// Perms is the number of random perturbations of each kind per frame.
	// Default 100.
	Perms int
	// Seeds are the game seeds of the expert rollouts frames are taken
	// from. Default: the first 3 held-out seeds (games.HeldOut(0..2)).
	Seeds []uint64
	// Frames is the number of frames taken from each rollout, spread
	// evenly over its first Spacing·Frames steps. Default 4.
	Frames int
	// Spacing is the number of game steps between two frames. Default 10.
	Spacing int
	// Noise is the number of uniform-noise tokens added in the noise test.
	// Default: a tenth of the grid's cells, at least 1.
	Noise int
	// Drop is the number of tokens removed in the drop test. Default: a
	// tenth of the grid's cells, at least 1 (and at most N−1).
	Drop int
	// Tol is the permutation bound for invariant families. Default
	// DefaultTol.
	Tol float64
	// Seed drives the perturbations (patch.DeriveSeed with the frame and
	// draw index). Default 0, a valid seed.
	Seed uint64
	// Corrupt, if not "", is a frame corruption list (patch.Spec.Corrupt,
	// e.g. "shift:3:0:wrap"): the policy also acts on every frame
	// corrupted by it, and Report.Corrupted holds the action change. Its
	// random draws come from Seed and the frame.
	Corrupt string
	// Progress, if set, is called after every frame with the frames done
	// and the total.
	Progress func(done, total int)
	// Pipe, if set, transforms every frame's tokens before the
	// measurement: the transformed set is the baseline the perturbations
	// start from (how the policy's action moves under a stress it already
	// faces). It must keep one token per cell: no drop fill, noise tokens
	// or duplicates. It is reset at each rollout from
	// DeriveSeed(Seed, rollout, StreamKey("verify.pipe")). Default none.
	Pipe *patch.Pipeline
}

func (c Config) withDefaults(n int) Config {
	if c.Perms <= 0 {
		c.Perms = 100
	}
	if len(c.Seeds) == 0 {
		c.Seeds = []uint64{games.HeldOut(0), games.HeldOut(1), games.HeldOut(2)}
	}
	if c.Frames <= 0 {
		c.Frames = 4
	}
	if c.Spacing <= 0 {
		c.Spacing = 10
	}
	tenth := max(1, n/10)
	if c.Noise <= 0 {
		c.Noise = tenth
	}
	if c.Drop <= 0 {
		c.Drop = tenth
	}
	if c.Drop > n-1 {
		c.Drop = n - 1
	}
	if c.Tol <= 0 {
		c.Tol = DefaultTol
	}
	return c
}

// Outputter is implemented by policies whose raw output (before any
// choice is made) can be compared; vision/nets networks implement it.
type Outputter interface {
	// OutputDim is the length of Forward's output.
	OutputDim() int
	// Forward writes the raw output for obs into out.
	Forward(obs *vision.Observation, out []float32) error
}

// Stat summarises the action changes of one kind of perturbation.
type Stat struct {
	// Max and Mean are the largest and mean action change.
	Max  float64 `json:"max"`
	Mean float64 `json:"mean"`
	// Count is the number of perturbed presentations measured.
	Count int `json:"count"`
	// Refused counts presentations the policy returned an error for (a
	// fixed-size family given another number of tokens); they are not in
	// Max and Mean. Reason is the first such error.
	Refused int    `json:"refused,omitempty"`
	Reason  string `json:"reason,omitempty"`
}

// Report is the outcome of a measurement.
type Report struct {
	// Format is the version of this record, 1.
	Format int `json:"format"`
	// Family, Label and Invariant come from the policy's Info.
	Family    string `json:"family"`
	Label     string `json:"label"`
	Invariant bool   `json:"invariant"`
	// Game is the game name; Tokens the grid's token count per frame.
	Game   string `json:"game"`
	Tokens int    `json:"tokens"`
	// Frames is the number of frames measured; Perms the draws per frame
	// and kind; Noise and Drop the tokens added and removed.
	Frames int `json:"frames"`
	Perms  int `json:"perms"`
	Noise  int `json:"noise_tokens"`
	Drop   int `json:"dropped_tokens"`
	// Compared is "output" (the raw output of an Outputter: logits for a
	// discrete game) or "action".
	Compared string `json:"compared"`
	// Permute: token order shuffled, each token keeping its grid position
	// (the same set in another order). Scramble: cell contents moved to
	// other cells (positions stay in grid order). Noise: noise tokens
	// added. Drop: tokens removed.
	Permute  Stat `json:"permute"`
	Scramble Stat `json:"scramble"`
	Noised   Stat `json:"noise"`
	Dropped  Stat `json:"drop"`
	// Corrupt is Config.Corrupt in canonical spelling, and Corrupted the
	// action change when the frame is corrupted by it (before
	// tokenizing); both left out without Config.Corrupt. Not part of
	// Pass: a whole-patch shift with wrap-around edges only moves tokens
	// between cells, so a family that ignores positions keeps its action,
	// while a shift by part of a patch changes what every token holds.
	Corrupt   string `json:"corrupt,omitempty"`
	Corrupted *Stat  `json:"corrupted,omitempty"`
	// Tol is the permutation bound; Pass is false only for an invariant
	// family whose permutation change exceeded it.
	Tol  float64 `json:"tol"`
	Pass bool    `json:"pass"`
}

// ErrNotInvariant is wrapped by Report.Err for an invariant family that
// failed the permutation bound.
var ErrNotInvariant = errors.New("declared permutation invariant but is not")

// Err returns nil if the report passes, else a one-line error with the
// figure.
func (r *Report) Err() error {
	if r.Pass {
		return nil
	}
	return fmt.Errorf("%s: %w: largest action change under permutation %.3g exceeds %.0e (mean %.3g over %d presentations)",
		r.Family, ErrNotInvariant, r.Permute.Max, r.Tol, r.Permute.Mean, r.Permute.Count)
}

type acc struct {
	sum float64
	s   Stat
}

func (a *acc) add(d float64) {
	a.s.Count++
	a.sum += d
	if d > a.s.Max || math.IsNaN(d) {
		a.s.Max = d
	}
}

func (a *acc) refuse(err error) {
	if a.s.Refused == 0 {
		a.s.Reason = err.Error()
	}
	a.s.Refused++
}

func (a *acc) stat() Stat {
	s := a.s
	if s.Count > 0 {
		s.Mean = a.sum / float64(s.Count)
	}
	return s
}

// Run measures pol on frames of g cut by tok. g's frame size must match
// tok's grid. The policy must not fail on the clean token set; an error
// there (or a non-finite action anywhere) ends the run.
func Run(g games.Game, tok *patch.Tokenizer, pol vision.Policy, cfg Config) (*Report, error) {
	sp := g.Spec()
	gr := tok.Grid()
	if gr.Width != sp.Width || gr.Height != sp.Height {
		return nil, fmt.Errorf("patch grid is for %dx%d frames, game %s renders %dx%d", gr.Width, gr.Height, sp.Name, sp.Width, sp.Height)
	}
	n, d := gr.N(), gr.D()
	cfg = cfg.withDefaults(n)
	info := pol.Info()
	m := &meter{
		pol: pol, cfg: cfg, space: sp.Action, grid: gr, tok: tok,
		clean:    patch.NewTokenSet(n, d),
		work:     patch.NewTokenSet(n+cfg.Noise, d),
		base:     make([]float64, sp.Action.Dim()),
		act:      make([]float64, sp.Action.Dim()),
		prev:     make([]float64, sp.Action.Dim()),
		perm:     make([]int, n),
		wantsPix: info.WantsFrame,
	}
	if o, ok := pol.(Outputter); ok {
		m.out = o
		m.base = make([]float64, o.OutputDim())
		m.act = make([]float64, o.OutputDim())
		m.raw = make([]float32, o.OutputDim())
	}
	if m.wantsPix {
		m.seen = image.NewRGBA(image.Rect(0, 0, gr.OutW, gr.OutH))
	}
	canon := ""
	if cfg.Corrupt != "" {
		var err error
		if canon, err = patch.CanonCorrupt(cfg.Corrupt); err != nil {
			return nil, err
		}
		if m.corrPipe, err = patch.NewPipeline(gr, patch.Spec{Corrupt: canon}); err != nil {
			return nil, err
		}
	}
	frame := image.NewRGBA(image.Rect(0, 0, sp.Width, sp.Height))
	raw := m.clean
	if cfg.Pipe != nil {
		if cfg.Pipe.Grid() != gr && *cfg.Pipe.Grid() != *gr {
			return nil, fmt.Errorf("transform pipeline: cut on %s, the tokens on %s", cfg.Pipe.Grid(), gr)
		}
		if cfg.Pipe.Capacity() != n || cfg.Pipe.Spec().Fill == "drop" {
			return nil, fmt.Errorf("transform %s: verify needs one token per cell (no drop fill, noise tokens or duplicates)", cfg.Pipe.Spec())
		}
		raw = patch.NewTokenSet(n, d)
	}
	var expert games.Expert
	if w, ok := g.(games.WithExpert); ok {
		expert = w.Expert()
	}
	total := len(cfg.Seeds) * cfg.Frames
	done := 0
	for si, seed := range cfg.Seeds {
		g.Reset(seed)
		clear(m.prev)
		if cfg.Pipe != nil {
			cfg.Pipe.Reset(patch.DeriveSeed(cfg.Seed, uint64(si), patch.StreamKey("verify.pipe")))
		}
		step := 0
		for fi := 0; fi < cfg.Frames; fi++ {
			g.Render(frame)
			if err := tok.Tokenize(frame, raw); err != nil {
				return nil, fmt.Errorf("tokenize frame: %w", err)
			}
			if cfg.Pipe != nil {
				if err := cfg.Pipe.Apply(step, raw, m.clean, nil); err != nil {
					return nil, fmt.Errorf("transform frame: %w", err)
				}
			}
			key := patch.DeriveSeed(cfg.Seed, uint64(si), uint64(fi))
			if err := m.frame(key, step); err != nil {
				return nil, fmt.Errorf("game seed %d, step %d: %w", seed, step, err)
			}
			if m.corrPipe != nil {
				if err := m.corrupted(frame, key, step); err != nil {
					return nil, fmt.Errorf("game seed %d, step %d: corrupt: %w", seed, step, err)
				}
			}
			done++
			if cfg.Progress != nil {
				cfg.Progress(done, total)
			}
			// Advance the expert rollout to the next frame.
			ended := false
			for k := 0; k < cfg.Spacing && !ended; k++ {
				if expert != nil {
					expert.Act(m.prev)
				} else {
					clear(m.prev)
				}
				st, err := g.Step(m.prev)
				if err != nil {
					return nil, fmt.Errorf("game seed %d, step %d: expert: %w", seed, step, err)
				}
				step++
				ended = st.Done
			}
			if ended {
				break
			}
		}
	}
	r := &Report{
		Format: 1, Family: info.Family, Label: info.Label, Invariant: info.Invariant,
		Game: sp.Name, Tokens: n, Frames: done, Perms: cfg.Perms, Noise: cfg.Noise, Drop: cfg.Drop,
		Permute: m.permute.stat(), Scramble: m.scramble.stat(), Noised: m.noise.stat(), Dropped: m.drop.stat(),
		Tol: cfg.Tol, Compared: "action",
	}
	if m.out != nil {
		r.Compared = "output"
	}
	if m.corrPipe != nil {
		st := m.corrupt.stat()
		r.Corrupt, r.Corrupted = canon, &st
	}
	r.Pass = !info.Invariant || (r.Permute.Refused == 0 && r.Permute.Max <= cfg.Tol)
	return r, nil
}

type meter struct {
	pol      vision.Policy
	cfg      Config
	space    games.Controls
	grid     *patch.Grid
	tok      *patch.Tokenizer
	clean    *patch.TokenSet
	work     *patch.TokenSet
	seen     *image.RGBA
	base     []float64
	act      []float64
	prev     []float64
	perm     []int
	wantsPix bool
	out      Outputter
	raw      []float32
	permute  acc
	scramble acc
	noise    acc
	drop     acc
	corrPipe *patch.Pipeline // Config.Corrupt, nil without
	corrupt  acc
}

// corrupted measures the action change when frame (of step step) is
// corrupted before it is tokenized, the corruption drawn from key.
func (m *meter) corrupted(frame *image.RGBA, key uint64, step int) error {
	m.corrPipe.Reset(patch.DeriveSeed(key, patch.StreamKey("verify.corrupt")))
	if err := m.corrPipe.TokenizeFrame(step, m.tok, frame, m.work); err != nil {
		return err
	}
	pseed := patch.DeriveSeed(key, patch.StreamKey("verify.policy"))
	if err := m.actOn(m.work, step, pseed, m.act); err != nil {
		m.corrupt.refuse(err)
		return nil
	}
	m.corrupt.add(m.change(m.base, m.act))
	return nil
}

// act runs the policy on ts, reset with seed, into dst.
func (m *meter) actOn(ts *patch.TokenSet, step int, seed uint64, dst []float64) error {
	obs := vision.Observation{Tokens: ts, Grid: m.grid, PrevAction: m.prev, Step: step}
	if m.wantsPix {
		if err := m.tok.Assemble(ts, m.seen); err != nil {
			return fmt.Errorf("assemble: %w", err)
		}
		obs.Frame = m.seen
	}
	m.pol.Reset(seed)
	clear(dst)
	if m.out != nil {
		if err := m.out.Forward(&obs, m.raw); err != nil {
			return err
		}
		for i, v := range m.raw {
			dst[i] = float64(v)
		}
	} else if err := m.pol.Act(&obs, dst); err != nil {
		return err
	}
	for i, v := range dst {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("policy output %d is %v", i, v)
		}
	}
	return nil
}

// change is the action change between a and b.
func (m *meter) change(a, b []float64) float64 {
	if m.space.Kind == games.Discrete && m.out == nil {
		if a[0] != b[0] {
			return 1
		}
		return 0
	}
	var d float64
	for i := range a {
		d = max(d, math.Abs(a[i]-b[i]))
	}
	return d
}

// frame measures one frame: key seeds the perturbations, step is the
// step index shown to the policy.
func (m *meter) frame(key uint64, step int) error {
	pseed := patch.DeriveSeed(key, patch.StreamKey("verify.policy"))
	if err := m.actOn(m.clean, step, pseed, m.base); err != nil {
		return fmt.Errorf("clean tokens: %w", err)
	}
	n, d := m.clean.N, m.clean.D
	kinds := []struct {
		name string
		a    *acc
		make func(r *rand.Rand)
	}{
		{"permute", &m.permute, func(r *rand.Rand) {
			m.shuffle(r, n)
			m.work.N, m.work.D = n, d
			for i, j := range m.perm {
				copy(m.work.Token(i), m.clean.Token(j))
				m.work.Pos[i] = m.clean.Pos[j]
			}
		}},
		{"scramble", &m.scramble, func(r *rand.Rand) {
			m.shuffle(r, n)
			m.work.N, m.work.D = n, d
			for i, j := range m.perm {
				copy(m.work.Token(i), m.clean.Token(j))
				m.work.Pos[i] = m.clean.Pos[i]
			}
		}},
		{"noise", &m.noise, func(r *rand.Rand) {
			m.work.CopyFrom(m.clean)
			m.work.N = n + m.cfg.Noise
			for i := n; i < m.work.N; i++ {
				tk := m.work.Token(i)
				for k := range tk {
					tk[k] = r.Float32()
				}
				m.work.Pos[i] = patch.NoCell
			}
		}},
		{"drop", &m.drop, func(r *rand.Rand) {
			// Keep a random subset of n−Drop tokens, in grid order.
			m.shuffle(r, n)
			keep := m.perm[m.cfg.Drop:]
			slices.Sort(keep)
			m.work.N, m.work.D = len(keep), d
			for i, j := range keep {
				copy(m.work.Token(i), m.clean.Token(j))
				m.work.Pos[i] = m.clean.Pos[j]
			}
		}},
	}
	for _, k := range kinds {
		rng := patch.NewRand(patch.DeriveSeed(key, patch.StreamKey("verify."+k.name)))
		for p := 0; p < m.cfg.Perms; p++ {
			k.make(rng)
			err := m.actOn(m.work, step, pseed, m.act)
			if err != nil {
				if k.a == &m.permute || k.a == &m.scramble {
					return fmt.Errorf("%s: %w", k.name, err)
				}
				k.a.refuse(err)
				continue
			}
			k.a.add(m.change(m.base, m.act))
		}
	}
	return nil
}

// shuffle fills m.perm[:n] with a uniform random permutation
// (Fisher–Yates, Knuth TAOCP vol. 2 §3.4.2 Algorithm P).
func (m *meter) shuffle(r *rand.Rand, n int) {
	for i := 0; i < n; i++ {
		m.perm[i] = i
	}
	for i := n - 1; i > 0; i-- {
		j := r.IntN(i + 1)
		m.perm[i], m.perm[j] = m.perm[j], m.perm[i]
	}
}

package probe

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/patch/frameio"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
	"tilebench/vision/remote"
	"tilebench/vision/stats/breakpoint"
	"tilebench/vision/study"
)

// Config is a probe as the user describes it (the flags of "tilebench
// probe"). Zero fields take the default documented on them.
type Config struct {
	// Name labels the probe in reports. Default "probe".
	Name string `json:"name"`
	// In is the recording: a folder of .png/.jpg frames, a .gif, a .npy
	// (uint8 N×H×W×C or N×H×W), a .rgb/.raw file or "-" (raw RGB24 on
	// stdin), as frameio.Open takes it.
	In string `json:"in"`
	// RawWidth and RawHeight are the frame size of raw RGB24 input.
	RawWidth  int `json:"raw_width,omitempty"`
	RawHeight int `json:"raw_height,omitempty"`
	// Episodes is the optional file of sequence boundaries (its layouts
	// are those of --episodes in docs/probe.md). Default: the whole
	// recording is one sequence.
	Episodes string `json:"episodes,omitempty"`
	// Actions is the optional .npy of recorded actions, one row per
	// frame (shape (N,) or (N, W), float or integer dtypes).
	Actions string `json:"actions,omitempty"`
	// Policy is the policy source: a weights file (.safetensors, its
	// "{patch}" replaced by each patch size), "fresh" (an untrained
	// network of Family), "exec:COMMAND ARGS" or "tcp://HOST:PORT".
	Policy string `json:"policy"`
	// Family is the network family of a fresh policy. Default "attention".
	Family string `json:"family,omitempty"`
	// ActionSpace is the action space of a fresh or external policy:
	// "continuous:N" (N values in [-1, 1]), "continuous:N:LOW:HIGH" or
	// "discrete:K". Default: taken from Actions (integers: discrete with
	// max+1 choices; otherwise continuous of its width, bounds ±1e6).
	ActionSpace string `json:"action_space,omitempty"`
	// Resize scales every frame to the policy's frame size "WxH" with a
	// triangle (bilinear) filter. Default: no resize; a recording of
	// another size than the policy's is an error.
	Resize string `json:"resize,omitempty"`
	// Patch lists patch sizes (square, pixels). Default: the weights
	// file's, else 8.
	Patch study.Axis `json:"patch"`
	// Axes are the transforms swept, in the grammar of a stress study
	// (Variations must be empty: there is no game).
	Axes study.Axes `json:"axes"`
	// Seed is the probe seed all seeds derive from. Default 0.
	Seed uint64 `json:"seed"`
	// Resamples is the bootstrap resample count. Default 2000.
	Resamples int `json:"resamples"`
	// Confidence is the interval level. Default 0.95.
	Confidence float64 `json:"confidence"`
	// Threshold is the drift past which an axis counts as broken (see
	// breakpoint.DriftBreak). Default breakpoint.DefaultDriftThreshold.
	Threshold float64 `json:"threshold"`
	// Timeout is an external policy's step timeout ("5s"). Default the
	// protocol's.
	Timeout string `json:"timeout,omitempty"`
	// Obs is what an external policy receives: "frame" (default) or
	// "tokens".
	Obs string `json:"obs,omitempty"`
	// StartTimeout bounds an external policy's start and handshake
	// ("30s"). Default the protocol's.
	StartTimeout string `json:"start_timeout,omitempty"`
	// Dtype is how observation values are sent to an external policy:
	// "uint8" (default) or "float32".
	Dtype string `json:"dtype,omitempty"`
	// Clamp clips an external policy's out-of-bounds continuous actions
	// instead of failing.
	Clamp bool `json:"clamp,omitempty"`
	// NoBatch turns off batched messages even for a policy that offers
	// them. Results do not depend on it (it is left out of the
	// fingerprint).
	NoBatch bool `json:"-"`
}

// Plan is a checked Config with its recording, sequences, actions, policy
// geometry and cells resolved.
type Plan struct {
	Config Config `json:"config"`
	// Input describes the recording (before any resize).
	Input frameio.Info `json:"input"`
	// Width and Height are the frame size the policy sees.
	Width  int `json:"width"`
	Height int `json:"height"`
	// Channels is 3 (frames are RGB; grey recordings are expanded).
	Sequences []Sequence `json:"sequences"`
	// Space is the policy's action space.
	Space ActionSpace `json:"action_space"`
	// Cells are the transform combinations, in study order.
	Cells []study.Cell `json:"cells"`
	// Fingerprint identifies the probe: 16 hex digits of the SHA-256 of
	// the plan and of the recorded actions.
	Fingerprint string `json:"fingerprint"`

	actions *Actions
}

// ActionSpace is an action space as probe.json stores it.
type ActionSpace struct {
	Kind    string    `json:"kind"`
	Dim     int       `json:"dim"`
	Choices int       `json:"choices,omitempty"`
	Low     []float64 `json:"low,omitempty"`
	High    []float64 `json:"high,omitempty"`
}

// Games returns the space as the games package spells it.
func (a ActionSpace) Games() games.Controls {
	if a.Kind == "discrete" {
		names := make([]string, a.Choices)
		for i := range names {
			names[i] = "choice" + strconv.Itoa(i)
		}
		return games.Controls{Kind: games.Discrete, Names: names}
	}
	names := make([]string, a.Dim)
	for i := range names {
		names[i] = "a" + strconv.Itoa(i)
	}
	return games.Controls{Kind: games.Continuous, Names: names, Low: a.Low, High: a.High}
}

func fromGames(s games.Controls) ActionSpace {
	if s.Kind == games.Discrete {
		return ActionSpace{Kind: "discrete", Dim: 1, Choices: s.Choices()}
	}
	return ActionSpace{Kind: "continuous", Dim: s.Dim(), Low: s.Low, High: s.High}
}

// Discrete reports whether actions are choices.
func (a ActionSpace) Discrete() bool { return a.Kind == "discrete" }

// ParseActionSpace reads "continuous:N", "continuous:N:LOW:HIGH" or
// "discrete:K".
func ParseActionSpace(s string) (ActionSpace, error) {
	parts := strings.Split(strings.TrimSpace(s), ":")
	bad := fmt.Errorf("action space %q: want continuous:N, continuous:N:LOW:HIGH or discrete:K", s)
	if len(parts) < 2 {
		return ActionSpace{}, bad
	}
	n, err := strconv.Atoi(parts[1])
	if err != nil || n < 1 || n > remote.MaxActionDim {
		return ActionSpace{}, bad
	}
	switch {
	case parts[0] == "discrete" && len(parts) == 2:
		if n < 2 {
			return ActionSpace{}, fmt.Errorf("action space %q: a discrete space needs at least 2 choices", s)
		}
		return ActionSpace{Kind: "discrete", Dim: 1, Choices: n}, nil
	case parts[0] == "continuous" && (len(parts) == 2 || len(parts) == 4):
		lo, hi := -1.0, 1.0
		if len(parts) == 4 {
			lo, err = strconv.ParseFloat(parts[2], 64)
			if err != nil {
				return ActionSpace{}, bad
			}
			hi, err = strconv.ParseFloat(parts[3], 64)
			if err != nil || !(lo < hi) || math.IsInf(lo, 0) || math.IsInf(hi, 0) {
				return ActionSpace{}, fmt.Errorf("action space %q: want finite LOW < HIGH", s)
			}
		}
		a := ActionSpace{Kind: "continuous", Dim: n, Low: make([]float64, n), High: make([]float64, n)}
		for i := range a.Low {
			a.Low[i], a.High[i] = lo, hi
		}
		return a, nil
	}
	return ActionSpace{}, bad
}

// unbounded is the bound of a continuous space inferred from recorded
// actions, which say nothing about bounds.
const unbounded = 1e6

// NewPlan checks cfg, opens the recording to read its geometry (and,
// for a folder, every frame's size), reads the episodes and actions files
// and resolves the policy's frame size and action space. Every problem is
// one error line naming the file and the row.
func NewPlan(cfg Config) (*Plan, error) {
	if cfg.Name == "" {
		cfg.Name = "probe"
	}
	if cfg.In == "" {
		return nil, errors.New("no recording given (--in FRAMES)")
	}
	if cfg.Policy == "" {
		return nil, errors.New("no policy given (--policy FILE.safetensors, fresh, exec:COMMAND or tcp://HOST:PORT)")
	}
	if cfg.Policy == "expert" {
		return nil, errors.New("policy expert reads a game's state; a probe has no game: give a weights file, fresh, exec: or tcp://")
	}
	if cfg.Family == "" {
		cfg.Family = "attention"
	}
	if cfg.Resamples == 0 {
		cfg.Resamples = study.DefaultResamples
	}
	if cfg.Resamples < 100 || cfg.Resamples > 1_000_000 {
		return nil, fmt.Errorf("resamples %d: want 100..1000000", cfg.Resamples)
	}
	if cfg.Confidence == 0 {
		cfg.Confidence = study.DefaultConfidence
	}
	if !(cfg.Confidence > 0 && cfg.Confidence < 1) {
		return nil, fmt.Errorf("confidence %v: want a number between 0 and 1", cfg.Confidence)
	}
	if cfg.Threshold == 0 {
		cfg.Threshold = breakpoint.DefaultDriftThreshold
	}
	if !(cfg.Threshold > 0) || math.IsInf(cfg.Threshold, 0) {
		return nil, fmt.Errorf("threshold %v: want a positive number", cfg.Threshold)
	}
	if cfg.Obs == "" {
		cfg.Obs = remote.ObsFrame
	}
	switch cfg.Dtype {
	case remote.Uint8:
		cfg.Dtype = "" // the default, spelt as before the option existed
	case "", remote.Float32:
	default:
		return nil, fmt.Errorf("dtype %q: want %s or %s", cfg.Dtype, remote.Uint8, remote.Float32)
	}
	if len(cfg.Axes.Variations) > 0 {
		return nil, errors.New("a probe has no game: variations do not apply")
	}
	if cfg.In == "-" {
		return nil, errors.New("stdin: a probe reads the recording once per cell; save the raw frames to a .rgb file and give --in FILE.rgb --size WxH")
	}
	if _, err := os.Stat(cfg.In); err == nil {
		if abs, err := filepath.Abs(cfg.In); err == nil {
			cfg.In = abs
		}
	}
	src, err := frameio.OpenRandom(cfg.In, frameio.Options{Width: cfg.RawWidth, Height: cfg.RawHeight})
	if err != nil {
		return nil, err
	}
	info := src.Info()
	src.Close()
	p := &Plan{Config: cfg, Input: info, Width: info.Width, Height: info.Height}
	if cfg.Episodes != "" {
		p.Sequences, err = readSequences(cfg.Episodes, info.Frames)
		if err != nil {
			return nil, err
		}
	} else {
		p.Sequences = []Sequence{{Start: 0, Len: info.Frames}}
	}
	if cfg.Actions != "" {
		p.actions, err = readActions(cfg.Actions)
		if err != nil {
			return nil, err
		}
		if p.actions.Rows != info.Frames {
			return nil, fmt.Errorf("actions %s: %d rows, but the recording %s has %d frames: want one row per frame", cfg.Actions, p.actions.Rows, info.Name, info.Frames)
		}
	}
	if err := p.resolvePolicy(); err != nil {
		return nil, err
	}
	if err := p.checkActions(); err != nil {
		return nil, err
	}
	def := study.Definition{Patch: cfg.Patch, Axes: cfg.Axes}
	if err := def.Normalize(); err != nil {
		return nil, err
	}
	p.Config.Patch, p.Config.Axes = def.Patch, def.Axes
	p.Cells, err = def.Cells()
	if err != nil {
		return nil, err
	}
	for _, c := range p.Cells {
		if _, err := patch.NewGrid(patch.GridConfig{Width: p.Width, Height: p.Height, PatchW: c.Patch}); err != nil {
			return nil, fmt.Errorf("patch %d on %dx%d frames: %w", c.Patch, p.Width, p.Height, err)
		}
	}
	if err := p.fingerprint(); err != nil {
		return nil, err
	}
	return p, nil
}

// resolvePolicy sets the frame size and action space from the weights
// file, or from the flags and the recording.
func (p *Plan) resolvePolicy() error {
	cfg := &p.Config
	fresh, ext := cfg.Policy == "fresh", remote.IsTarget(cfg.Policy)
	var space *ActionSpace
	if cfg.ActionSpace != "" {
		s, err := ParseActionSpace(cfg.ActionSpace)
		if err != nil {
			return err
		}
		space = &s
	}
	if !fresh && !ext {
		// A weights file (or a {patch} template: its patch sizes must be
		// given and the files agree on frame size and actions).
		sizes, err := cfg.Patch.Values("")
		if err != nil {
			return fmt.Errorf("patch: %w", err)
		}
		if strings.Contains(cfg.Policy, "{patch}") && (len(sizes) == 0 || sizes[0] == "") {
			return fmt.Errorf("policy %s: a {patch} template needs --patch", cfg.Policy)
		}
		if len(sizes) == 0 || sizes[0] == "" {
			n, err := nets.Load(cfg.Policy)
			if err != nil {
				return err
			}
			g := n.Grid()
			if g.PatchW != g.PatchH {
				return fmt.Errorf("policy %s: patches of %dx%d are not square", cfg.Policy, g.PatchW, g.PatchH)
			}
			cfg.Patch = study.Axis{strconv.Itoa(g.PatchW)}
			sizes = []string{strconv.Itoa(g.PatchW)}
		}
		for i, s := range sizes {
			ps, err := strconv.Atoi(s)
			if err != nil {
				return fmt.Errorf("patch %q: want a whole number", s)
			}
			path := policies.Expand(cfg.Policy, ps)
			n, err := nets.Load(path)
			if err != nil {
				return err
			}
			g := n.Grid()
			if g.PatchW != ps || g.PatchH != ps {
				return fmt.Errorf("%s: weights are for patch %dx%d, not %d", path, g.PatchW, g.PatchH, ps)
			}
			ns := fromGames(n.Space())
			if i == 0 {
				p.Width, p.Height, p.Space = g.Width, g.Height, ns
			} else if g.Width != p.Width || g.Height != p.Height || ns.Kind != p.Space.Kind || ns.Dim != p.Space.Dim || ns.Choices != p.Space.Choices {
				return fmt.Errorf("%s: weights are for %dx%d frames and %s actions of %d, %s for %dx%d and %s of %d", path, g.Width, g.Height, ns.Kind, ns.Dim,
					policies.Expand(cfg.Policy, mustAtoi(sizes[0])), p.Width, p.Height, p.Space.Kind, p.Space.Dim)
			}
		}
		if space != nil && (space.Kind != p.Space.Kind || space.Dim != p.Space.Dim || space.Choices != p.Space.Choices) {
			return fmt.Errorf("action space %s does not match the weights file's %s space of %d", cfg.ActionSpace, p.Space.Kind, p.Space.Dim)
		}
		return p.resolveSize(true)
	}
	switch {
	case space != nil:
		p.Space = *space
	case p.actions != nil && p.actions.Integer && p.actions.Width == 1:
		k := 0
		for _, v := range p.actions.V {
			k = max(k, int(v)+1)
		}
		p.Space = ActionSpace{Kind: "discrete", Dim: 1, Choices: max(k, 2)}
	case p.actions != nil:
		w := p.actions.Width
		p.Space = ActionSpace{Kind: "continuous", Dim: w, Low: make([]float64, w), High: make([]float64, w)}
		for i := 0; i < w; i++ {
			p.Space.Low[i], p.Space.High[i] = -unbounded, unbounded
		}
	default:
		return fmt.Errorf("policy %s: with no game the action space must be given: --action-space continuous:N or discrete:K, or --actions FILE.npy", cfg.Policy)
	}
	return p.resolveSize(false)
}

func mustAtoi(s string) int { n, _ := strconv.Atoi(s); return n }

// resolveSize applies --resize: the policy's frame size is fixed by a
// weights file, else it is the recording's (or the resize target).
func (p *Plan) resolveSize(fixed bool) error {
	cfg := &p.Config
	in := p.Input
	if cfg.Resize != "" {
		w, h, err := patch.ParseSize(cfg.Resize)
		if err != nil {
			return fmt.Errorf("resize: %w", err)
		}
		if fixed && (w != p.Width || h != p.Height) {
			return fmt.Errorf("resize %dx%d: the policy's weights take %dx%d frames", w, h, p.Width, p.Height)
		}
		p.Width, p.Height = w, h
		return nil
	}
	if fixed && (in.Width != p.Width || in.Height != p.Height) {
		return fmt.Errorf("%s: frames are %dx%d, the policy %s takes %dx%d: give --resize %dx%d", in.Name, in.Width, in.Height, cfg.Policy, p.Width, p.Height, p.Width, p.Height)
	}
	if !fixed {
		p.Width, p.Height = in.Width, in.Height
	}
	return nil
}

// checkActions checks the recorded actions against the action space.
func (p *Plan) checkActions() error {
	a := p.actions
	if a == nil {
		return nil
	}
	name := p.Config.Actions
	if a.Width != p.Space.Dim {
		return fmt.Errorf("actions %s: %d values per row, the policy's actions have %d", name, a.Width, p.Space.Dim)
	}
	if p.Space.Discrete() {
		for i, v := range a.V {
			if v != math.Trunc(v) || v < 0 || int(v) >= p.Space.Choices {
				return fmt.Errorf("actions %s: row %d holds %v, want a choice 0..%d", name, i, v, p.Space.Choices-1)
			}
		}
	}
	return nil
}

// Actions returns the recorded actions (nil when none were given).
func (p *Plan) Actions() *Actions { return p.actions }

func (p *Plan) fingerprint() error {
	js, err := json.Marshal(struct {
		Config    Config
		Input     frameio.Info
		W, H      int
		Sequences []Sequence
		Space     ActionSpace
		Cells     []study.Cell
	}{p.Config, p.Input, p.Width, p.Height, p.Sequences, p.Space, p.Cells})
	if err != nil {
		return fmt.Errorf("probe fingerprint: %w", err)
	}
	h := sha256.New()
	h.Write(js)
	if p.actions != nil {
		var b [8]byte
		for _, v := range p.actions.V {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(v))
			h.Write(b[:])
		}
	}
	if !remote.IsTarget(p.Config.Policy) && p.Config.Policy != "fresh" {
		sizes, _ := p.Config.Patch.Values("8")
		for _, s := range sizes {
			data, err := os.ReadFile(policies.Expand(p.Config.Policy, mustAtoi(s)))
			if err != nil {
				return fmt.Errorf("policy: %w", err)
			}
			h.Write(data)
		}
	}
	p.Fingerprint = hex.EncodeToString(h.Sum(nil)[:8])
	return nil
}

// Units is the number of (cell, sequence) units.
func (p *Plan) Units() int { return len(p.Cells) * len(p.Sequences) }

// PolicySeed is the policy's seed for sequence s, the same in the clean
// and the transformed pass and in every cell:
// DeriveSeed(seed, StreamKey("probe-policy"), s).
func (p *Plan) PolicySeed(s int) uint64 {
	return patch.DeriveSeed(p.Config.Seed, patch.StreamKey("probe-policy"), uint64(s))
}

// PipeSeed is the transform's seed for sequence s of cell c:
// DeriveSeed(seed, StreamKey("probe-pipe"), StreamKey(cell key), s).
func (p *Plan) PipeSeed(c, s int) uint64 {
	return patch.DeriveSeed(p.Config.Seed, patch.StreamKey("probe-pipe"), patch.StreamKey(p.Cells[c].Key()), uint64(s))
}

// NetSeed initialises a fresh network for patch size ps:
// DeriveSeed(seed, StreamKey("policy"), ps), as in a study.
func (p *Plan) NetSeed(ps int) uint64 {
	return patch.DeriveSeed(p.Config.Seed, patch.StreamKey("policy"), uint64(ps))
}

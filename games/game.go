// Package games defines the seeded, deterministic game interface that
// tilebench runs policies in, and registers the built-in games.
//
// Nothing in this package knows about patches or policies: a game takes an
// action, advances its state, and draws its observation into a
// caller-owned *image.RGBA.
package games

import (
	"errors"
	"fmt"
	"image"
	"math"
	"sort"
	"strings"
)

// ActionKind says whether a game takes continuous or discrete actions.
type ActionKind int

const (
	// Continuous actions are vectors of Dim() numbers within [Low, High].
	Continuous ActionKind = iota
	// Discrete actions pick one of len(Names) named choices.
	Discrete
)

// String returns "continuous" or "discrete".
func (k ActionKind) String() string {
	if k == Discrete {
		return "discrete"
	}
	return "continuous"
}

// Controls describes the actions a game accepts.
//
// An action is always passed as a []float64: for a continuous space it
// holds Dim() values; for a discrete space it holds one value, the index of
// the choice (0, 1, ...).
type Controls struct {
	Kind ActionKind
	// Names names each continuous dimension ("steer", "throttle", ...) or
	// each discrete choice ("left", "stay", "right").
	Names []string
	// Low and High bound each continuous dimension; unused for Discrete.
	Low, High []float64
}

// Dim is the length of an action vector: the number of continuous
// dimensions, or 1 for a discrete space.
func (a Controls) Dim() int {
	if a.Kind == Discrete {
		return 1
	}
	return len(a.Names)
}

// Choices is the number of discrete choices (0 for a continuous space).
func (a Controls) Choices() int {
	if a.Kind == Discrete {
		return len(a.Names)
	}
	return 0
}

// ErrBadAction is wrapped by every error a game returns for an action it
// cannot take (wrong length, NaN, infinite, out of range choice).
var ErrBadAction = errors.New("bad action")

// Check returns an error wrapping ErrBadAction if action does not fit a.
// Continuous values outside [Low, High] are allowed (games clamp them);
// non-finite values are not.
func (a Controls) Check(action []float64) error {
	if len(action) != a.Dim() {
		return fmt.Errorf("%w: %d values, want %d", ErrBadAction, len(action), a.Dim())
	}
	for i, v := range action {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%w: value %d is %v", ErrBadAction, i, v)
		}
	}
	if a.Kind == Discrete {
		c := action[0]
		if c != math.Trunc(c) || c < 0 || int(c) >= len(a.Names) {
			return fmt.Errorf("%w: choice %v, want 0..%d", ErrBadAction, c, len(a.Names)-1)
		}
	}
	return nil
}

// EndReason says why an episode ended.
type EndReason int

const (
	// NotEnded: the episode goes on.
	NotEnded EndReason = iota
	// Completed: the goal was reached (a lap driven).
	Completed
	// Failed: the game's failure rule ended it (off the road too long,
	// too many misses).
	Failed
	// TimeUp: the step limit was reached.
	TimeUp
)

// String returns the word used in every output: "running", "completed",
// "failed" or "time-up".
func (r EndReason) String() string {
	switch r {
	case NotEnded:
		return "running"
	case Completed:
		return "completed"
	case Failed:
		return "failed"
	case TimeUp:
		return "time-up"
	}
	return fmt.Sprintf("reason(%d)", int(r))
}

// Spec is what a game declares about itself.
type Spec struct {
	// Name is the registered game name ("drive", "paddle").
	Name string
	// Variation is the variation name in use ("" means the default).
	Variation string
	// Width and Height are the observation frame size in pixels.
	Width, Height int
	// Action is the action space.
	Action Controls
	// StepLimit is the step limit of one episode.
	StepLimit int
	// Floors are the game's documented baseline returns (docs/games.md),
	// measured on the development range of held-out seeds; zero values
	// mean not measured. Studies that normalise scores measure their own
	// floor on their own seeds; these figures are for reading and checks.
	Floors Floors
}

// Floors are the mean returns of the two baseline policies every game
// documents: one that does nothing (the zero action, or the discrete
// choice named "stay"), and one that draws each action uniformly at random.
type Floors struct {
	Idle, Random float64
}

// Step is the outcome of one game step.
type Step struct {
	Reward float64
	Done   bool
	Reason EndReason
}

// Game is a seeded, deterministic game. The same seed and the same actions
// give the same frames and rewards, byte for byte.
type Game interface {
	// Spec describes the game.
	Spec() Spec
	// Reset starts a new episode from seed.
	Reset(seed uint64)
	// Step advances one fixed time step. It returns an error wrapping
	// ErrBadAction, and changes nothing, if the action does not fit the
	// action space.
	Step(action []float64) (Step, error)
	// Render draws the current observation into dst, which must be
	// Spec().Width × Spec().Height. It does not allocate.
	Render(dst *image.RGBA)
}

// Expert is a scripted controller that reads the true game state (not
// pixels). Act writes the action for the current state into dst
// (len = Spec().Action.Dim()).
type Expert interface {
	Act(dst []float64)
}

// WithExpert is implemented by games that ship a scripted expert.
type WithExpert interface {
	Game
	// Expert returns the expert bound to this game instance; it follows
	// the game's state across Reset and Step.
	Expert() Expert
}

// Setup configure a game at construction. The zero value gives the
// default game.
type Setup struct {
	// Variation names a variation (palette set, sizes, distractors); ""
	// means the default. Each game documents its variations.
	Variation string
	// Width and Height override the frame size; 0 keeps the game's default.
	Width, Height int
}

// Constructor builds a game from options.
type Constructor func(Setup) (Game, error)

var registry = map[string]registered{}

type registered struct {
	make       Constructor
	variations []string
}

// Provide makes a game available by name. It is called from the init
// function of each game's package and panics on a duplicate name
// (a programming error, never user input).
func Provide(name string, variations []string, make Constructor) {
	if _, dup := registry[name]; dup {
		panic("games: duplicate game " + name)
	}
	registry[name] = registered{make: make, variations: variations}
}

// Build builds the named game.
func Build(name string, opt Setup) (Game, error) {
	if err := Known(name); err != nil {
		return nil, err
	}
	return registry[name].make(opt)
}

// Known returns nil when name is a registered game, else the error Build
// gives for it: one line naming the game and the games there are.
func Known(name string) error {
	if _, ok := registry[name]; !ok {
		return fmt.Errorf("unknown game %q (have %s)", name, strings.Join(Names(), ", "))
	}
	return nil
}

// Names lists the registered games, sorted.
func Names() []string {
	var out []string
	for n := range registry {
		out = append(out, n)
	}
	sort.Strings(out)
	return out
}

// Variations lists the named variations of a registered game.
func Variations(name string) []string { return registry[name].variations }

// Seed ranges. Training (and anything tuned) uses seeds in
// [TrainSeedStart, TrainSeedStart+SeedRangeLen); evaluation defaults to the
// held-out range [HeldOutSeedStart, HeldOutSeedStart+SeedRangeLen). The two
// never overlap; every command uses them.
const (
	TrainSeedStart   uint64 = 0
	HeldOutSeedStart uint64 = 1_000_000
	SeedRangeLen     uint64 = 1_000_000
)

// The held-out range is split in two. The development range, its first
// DevSeedLen seeds, is where experts, defaults and reference policies
// were designed and checked (docs/training.md: seeds 1 000 000 + 0…49);
// figures measured there are not unbiased. The sealed test range, the
// rest, is what studies default to, and docs/games.md says which range
// every shipped figure came from.
const (
	DevSeedStart    = HeldOutSeedStart
	DevSeedLen      = uint64(10_000)
	SealedSeedStart = HeldOutSeedStart + DevSeedLen
	SealedSeedLen   = SeedRangeLen - DevSeedLen
)

// Dev returns the i-th seed of the development range.
func Dev(i int) uint64 { return DevSeedStart + uint64(i) }

// Sealed returns the i-th seed of the sealed test range.
func Sealed(i int) uint64 { return SealedSeedStart + uint64(i) }

// HeldOut returns the i-th held-out seed.
func HeldOut(i int) uint64 { return HeldOutSeedStart + uint64(i) }

// Train returns the i-th training seed.
func Train(i int) uint64 { return TrainSeedStart + uint64(i) }

// Variation is one named edit of a game's configuration C.
type Variation[C any] struct {
	// Name is the variation's name in variation strings.
	Name string
	// Doc says in a few words what it changes.
	Doc string
	// Group names what it sets ("palette", "road width"); two variations
	// of one group exclude each other.
	Group string
	// Edit applies the variation.
	Edit func(*C)
}

// VariationSet is the list of a game's variations.
type VariationSet[C any] []Variation[C]

// Names lists the variation names in their declared order.
func (vs VariationSet[C]) Names() []string {
	out := make([]string, len(vs))
	for i, v := range vs {
		out[i] = v.Name
	}
	return out
}

// Doc describes the named variation ("" for an unknown one).
func (vs VariationSet[C]) Doc(name string) string {
	for _, v := range vs {
		if v.Name == name {
			return v.Doc
		}
	}
	return ""
}

// Apply reads a variation string — names joined with "+"
// ("tarn+clutter"; "" and "default" name none) — and applies each
// named edit to c in sorted order. It returns the canonical spelling:
// names sorted, duplicates dropped. Unknown names and two names of one
// group are errors naming the game.
func (vs VariationSet[C]) Apply(game, s string, c *C) (string, error) {
	if s == "" || s == "default" {
		return "", nil
	}
	taken := map[string]string{}
	var names []string
	for _, part := range strings.Split(s, "+") {
		part = strings.TrimSpace(part)
		v := vs.find(part)
		if v == nil {
			return "", fmt.Errorf("%s: unknown variation %q (have %s, joined with +)", game, part, strings.Join(vs.Names(), ", "))
		}
		if prev, ok := taken[v.Group]; ok {
			if prev == part {
				continue
			}
			return "", fmt.Errorf("%s: variations %q and %q both set the %s", game, prev, part, v.Group)
		}
		taken[v.Group] = part
		names = append(names, part)
	}
	sort.Strings(names)
	for _, n := range names {
		vs.find(n).Edit(c)
	}
	return strings.Join(names, "+"), nil
}

func (vs VariationSet[C]) find(name string) *Variation[C] {
	for i := range vs {
		if vs[i].Name == name {
			return &vs[i]
		}
	}
	return nil
}

package runner

import (
	"fmt"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/study"
)

// Player plays episodes of one cell.
type Player interface {
	// Play runs one episode: the game from gameSeed, the pipeline and the
	// policy from pipeSeed. hook may be nil.
	Play(gameSeed, pipeSeed uint64, hook vision.StepHook) (vision.Result, error)
}

// Env builds players. Each worker has its own Env, used by that worker
// only, so an Env may cache games and policies between cells.
type Env interface {
	// Player returns a player for cell c.
	Player(c study.Cell) (Player, error)
	// Close releases what the Env holds (external policy processes).
	Close() error
}

// EnvFactory makes one Env per worker. worker numbers run from 0.
type EnvFactory func(worker int) (Env, error)

// PolicyFunc makes the policy for one patch size. It is called once per
// worker and patch size, with the worker's game and the grid the policy
// will see.
type PolicyFunc func(patchSize int, g games.Game, grid *patch.Grid) (vision.Policy, error)

// GameEnv is the Env that plays the built-in games through the patch
// pipeline (vision.Episode).
type GameEnv struct {
	game     string
	policy   map[string]PolicyFunc
	games    map[string]games.Game
	policies map[policyKey]vision.Policy
	grids    map[int]*patch.Grid
	closers  []func() error
}

// NewGameEnv returns an Env for the named game whose policies come from
// pol (a study of one unlabelled policy).
func NewGameEnv(game string, pol PolicyFunc) *GameEnv {
	return NewGameEnvSet(game, map[string]PolicyFunc{"": pol})
}

// NewGameEnvSet returns an Env for the named game that plays each cell
// with the policy of its label (study.Cell.Policy).
func NewGameEnvSet(game string, pols map[string]PolicyFunc) *GameEnv {
	return &GameEnv{game: game, policy: pols, games: map[string]games.Game{},
		policies: map[policyKey]vision.Policy{}, grids: map[int]*patch.Grid{}}
}

// Player builds (or reuses) the game, policy, tokenizer and pipeline for c.
func (e *GameEnv) Player(c study.Cell) (Player, error) {
	g, ok := e.games[c.Variation]
	if !ok {
		var err error
		g, err = games.Build(e.game, games.Setup{Variation: c.Variation})
		if err != nil {
			return nil, fmt.Errorf("game %s variation %q: %w", e.game, c.Variation, err)
		}
		e.games[c.Variation] = g
	}
	sp := g.Spec()
	grid, ok := e.grids[c.Patch]
	if !ok {
		var err error
		grid, err = patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: c.Patch})
		if err != nil {
			return nil, fmt.Errorf("patch %d on %s: %w", c.Patch, e.game, err)
		}
		e.grids[c.Patch] = grid
	}
	// One policy per label, patch size and game instance: the scripted
	// experts are bound to the game they read.
	pk := policyKey{c.Policy, c.Patch, c.Variation}
	pol, ok := e.policies[pk]
	if !ok {
		pf, ok := e.policy[c.Policy]
		if !ok {
			return nil, fmt.Errorf("cell %s: no policy labelled %q", c.Label(), c.Policy)
		}
		var err error
		pol, err = pf(c.Patch, g, grid)
		if err != nil {
			if c.Policy != "" {
				return nil, fmt.Errorf("policy %s for patch %d: %w", c.Policy, c.Patch, err)
			}
			return nil, fmt.Errorf("policy for patch %d: %w", c.Patch, err)
		}
		if cl, ok := pol.(interface{ Close() error }); ok {
			e.closers = append(e.closers, cl.Close)
		}
		e.policies[pk] = pol
	}
	pipe, err := patch.NewPipeline(grid, c.Spec())
	if err != nil {
		return nil, fmt.Errorf("cell %s: %w", c.Label(), err)
	}
	ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, pol)
	if err != nil {
		return nil, err
	}
	return episodePlayer{ep}, nil
}

// Close closes the policies that hold resources.
func (e *GameEnv) Close() error {
	var first error
	for _, c := range e.closers {
		if err := c(); err != nil && first == nil {
			first = err
		}
	}
	e.closers = nil
	return first
}

type policyKey struct {
	label     string
	patch     int
	variation string
}

type episodePlayer struct{ ep *vision.Episode }

// Play runs one episode (vision.Episode.Run, which also tells an
// external policy how the episode ended).
func (p episodePlayer) Play(gameSeed, pipeSeed uint64, hook vision.StepHook) (vision.Result, error) {
	return p.ep.Run(gameSeed, pipeSeed, hook)
}

package runner

import (
	"context"
	"fmt"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// BaselineEnv is implemented by Envs that can play a baseline policy (the
// study's floor, the scripted expert) on the clean game, so that a study
// can put its scores on the normalised scale. GameEnv implements it; a
// study run with an Env that does not records no floors, and its
// retention is the plain ratio.
type BaselineEnv interface {
	// Baseline returns a player of the policy source on the clean game
	// of variation, cut at patch size ps. ok is false when the game has
	// no such policy (no scripted expert).
	Baseline(source, variation string, ps int) (pl Player, ok bool, err error)
}

// Baseline plays source clean on a game instance of its own.
func (e *GameEnv) Baseline(source, variation string, ps int) (Player, bool, error) {
	g, err := games.Build(e.game, games.Setup{Variation: variation})
	if err != nil {
		return nil, false, fmt.Errorf("game %s variation %q: %w", e.game, variation, err)
	}
	sp := g.Spec()
	if source == policies.Expert {
		if _, ok := g.(games.WithExpert); !ok {
			return nil, false, nil
		}
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: ps})
	if err != nil {
		return nil, false, fmt.Errorf("patch %d on %s: %w", ps, e.game, err)
	}
	pol, err := policies.Open(source, g, grid, policies.Options{})
	if err != nil {
		return nil, false, fmt.Errorf("floor policy %q: %w", source, err)
	}
	if cl, ok := pol.(interface{ Close() error }); ok {
		e.closers = append(e.closers, cl.Close)
	}
	pipe, err := patch.NewPipeline(grid, patch.Spec{})
	if err != nil {
		return nil, false, err
	}
	ep, err := vision.NewEpisode(g, patch.NewTokenizer(grid), pipe, pol)
	if err != nil {
		return nil, false, err
	}
	return episodePlayer{ep}, true, nil
}

// FloorSeed is the pipeline and policy seed of baseline episode e (the
// random policy's action stream): DeriveSeed(study seed,
// StreamKey("floor"), e). The game seed is the study's, Plan.GameSeed(e).
func FloorSeed(p *study.Plan, e int) uint64 {
	return patch.DeriveSeed(p.Def.Seed, patch.StreamKey("floor"), uint64(e))
}

// recordFloors plays the study's floor policy and, when the game ships
// one, the scripted expert on every variation the study uses and every
// episode's game seed, and writes floors.json. A table already recorded
// for this study and floor is kept. Envs that are not BaselineEnvs
// record nothing.
func recordFloors(ctx context.Context, p *study.Plan, opt Options) error {
	floor := p.Def.Floor
	if floor == "" {
		floor = analysis.DefaultFloor
	}
	if old, err := analysis.ReadFloors(opt.Dir); err == nil && old != nil && old.Study == p.Fingerprint && old.Floor == floor {
		return nil
	}
	env, err := opt.Env(0)
	if err != nil {
		return err
	}
	defer env.Close()
	be, ok := env.(BaselineEnv)
	if !ok {
		return nil
	}
	t := &analysis.FloorTable{Study: p.Fingerprint, Floor: floor}
	var vars []string
	seen := map[string]bool{}
	for _, c := range p.Cells {
		if !seen[c.Variation] {
			seen[c.Variation] = true
			vars = append(vars, c.Variation)
		}
	}
	ps := p.Cells[0].Patch
	play := func(source, v string) (*analysis.Baseline, error) {
		pl, ok, err := be.Baseline(source, v, ps)
		if err != nil || !ok {
			return nil, err
		}
		b := &analysis.Baseline{Variation: v, Returns: make([]float64, p.Def.Episodes)}
		errs := make([]string, p.Def.Episodes)
		anyErr := false
		for e := range b.Returns {
			if ctx.Err() != nil {
				return nil, fmt.Errorf("%w: baselines not recorded", ErrInterrupted)
			}
			res, err := safePlay(pl, p.GameSeed(e), FloorSeed(p, e), nil)
			if err != nil {
				errs[e], anyErr = oneLine(err.Error()), true
				continue
			}
			b.Returns[e] = res.Return
		}
		if anyErr {
			b.Errors = errs
		}
		return b, nil
	}
	for _, v := range vars {
		b, err := play(floor, v)
		if err != nil {
			return err
		}
		if b != nil {
			t.Floors = append(t.Floors, *b)
		}
		if p.Def.Policy.Source != policies.Expert {
			b, err = play(policies.Expert, v)
			if err != nil {
				return err
			}
			if b != nil {
				t.Expert = append(t.Expert, *b)
			}
		}
	}
	return analysis.WriteFloors(opt.Dir, t)
}

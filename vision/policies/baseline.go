package policies

import (
	"math/rand/v2"
	"slices"

	"tilebench/games"
	"tilebench/internal/seeds"
	"tilebench/vision"
)

// Baseline sources: the two floor policies every game documents and
// every study can measure on its own seeds (the floor of the normalised
// score).
const (
	// Idle does nothing: the zero action of a continuous game, the choice
	// named "stay" (else the first) of a discrete one.
	Idle = "idle"
	// Random draws every action uniformly: each continuous value in
	// [Low, High], a discrete choice among all, from a stream seeded by
	// the episode's seed.
	Random = "random"
)

// KindBaseline is the kind of the idle and random sources.
const KindBaseline = "baseline"

// IsBaseline reports whether source names a baseline policy.
func IsBaseline(source string) bool { return source == Idle || source == Random }

// NewBaseline returns the idle or random policy for the action space of
// sp; ok is false for any other name. Neither reads the observation.
func NewBaseline(name string, sp games.Spec) (vision.Policy, bool) {
	switch name {
	case Idle:
		p := &idlePolicy{act: sp.Action}
		if sp.Action.Kind == games.Discrete {
			if i := slices.Index(sp.Action.Names, "stay"); i > 0 {
				p.choice = float64(i)
			}
		}
		return p, true
	case Random:
		return &randomPolicy{act: sp.Action, r: seeds.NewRand(0)}, true
	}
	return nil, false
}

type idlePolicy struct {
	act    games.Controls
	choice float64
}

func (p *idlePolicy) Info() vision.Info {
	return vision.Info{Family: KindBaseline, Label: "idle baseline (does nothing)", Invariant: true, Blind: true}
}

func (p *idlePolicy) Reset(uint64) {}

func (p *idlePolicy) Act(_ *vision.Observation, action []float64) error {
	if p.act.Kind == games.Discrete {
		action[0] = p.choice
		return nil
	}
	clear(action)
	return nil
}

type randomPolicy struct {
	act games.Controls
	r   *rand.Rand
}

func (p *randomPolicy) Info() vision.Info {
	return vision.Info{Family: KindBaseline, Label: "random baseline (uniform actions)", Blind: true}
}

// Reset seeds the action stream from the episode's seed, so an episode
// of the random policy can be played again alone.
func (p *randomPolicy) Reset(seed uint64) {
	p.r = seeds.NewRand(seeds.DeriveSeed(seed, seeds.StreamKey("random-policy")))
}

func (p *randomPolicy) Act(_ *vision.Observation, action []float64) error {
	if p.act.Kind == games.Discrete {
		action[0] = float64(p.r.IntN(len(p.act.Names)))
		return nil
	}
	for i := range action {
		lo, hi := p.act.Low[i], p.act.High[i]
		action[i] = lo + (hi-lo)*p.r.Float64()
	}
	return nil
}

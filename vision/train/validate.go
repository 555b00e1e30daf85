package train

import (
	"fmt"
	"math"

	"tilebench/vision"
)

// Upper bounds of Validate: far beyond any useful run, low enough that a
// typing slip cannot allocate the machine away.
const (
	maxEpisodes = 100_000
	maxPairs    = 10_000
	maxBatch    = 1 << 20
)

// Validate checks c as given, before defaults: every number in its
// stated range, 0 where 0 means the default, NaN and infinities refused,
// the worker count capped (vision.CheckWorkers) unless ForceWorkers is
// set. New calls it.
func (c Config) Validate() error {
	type iv struct {
		name    string
		v       int
		lo, hi  int
		meaning string
	}
	for _, f := range []iv{
		{"patch", c.Patch, 0, 1 << 12, "0 means 8"},
		{"iterations", c.Iters, 0, math.MaxInt32, "0 means no limit"},
		{"patience", c.Patience, -1, 1 << 20, "0 means the method's default, -1 never stops early"},
		{"min-iters", c.MinIters, -1, 1 << 20, "0 means the method's default, -1 none"},
		{"validate every", c.ValEvery, 0, 1 << 20, "0 means the method's default"},
		{"validation episodes", c.ValEpisodes, 0, maxEpisodes, "0 means 8"},
		{"fitness episodes", c.FitnessEpisodes, 0, maxEpisodes, "0 means 2"},
		{"held-out episodes", c.HeldOutEpisodes, 0, maxEpisodes, "0 means 50"},
		{"clone episodes per round", c.Clone.EpisodesPerRound, 0, maxEpisodes, "0 means 4"},
		{"clone epochs", c.Clone.Epochs, 0, 1 << 16, "0 means 2"},
		{"clone batch", c.Clone.Batch, 0, maxBatch, "0 means 64"},
		{"clone keep", c.Clone.Keep, 0, 1 << 16, "0 means 2"},
		{"es pairs", c.ES.Pairs, 0, maxPairs, "0 means 16"},
		{"cmaes population", c.CMA.Population, 0, 2 * maxPairs, "0 means 4+⌊3 ln n⌋"},
	} {
		if f.v < f.lo || f.v > f.hi {
			return fmt.Errorf("%s %d: want %d..%d (%s)", f.name, f.v, f.lo, f.hi, f.meaning)
		}
	}
	if c.Budget < 0 {
		return fmt.Errorf("budget %v: want 0 (5 minutes) or more", c.Budget)
	}
	for _, f := range []struct {
		name    string
		v       float64
		meaning string
	}{
		{"learning rate", c.Clone.LR, "0 means the method's default"},
		{"es learning rate", c.ES.LR, "0 means 0.01"},
		{"es sigma", c.ES.Sigma, "0 means 0.05"},
		{"es weight decay", c.ES.WeightDecay, "0 means none"},
		{"cmaes sigma", c.CMA.Sigma, "0 means 0.1"},
	} {
		if math.IsNaN(f.v) || math.IsInf(f.v, 0) || f.v < 0 {
			return fmt.Errorf("%s %v: want a finite number ≥ 0 (%s)", f.name, f.v, f.meaning)
		}
	}
	if b := c.Clone.BetaDecay; math.IsNaN(b) || b < 0 || b >= 1 {
		return fmt.Errorf("beta decay %v: want 0 (0.5) or a number in (0, 1)", b)
	}
	if err := vision.CheckWorkers(c.Workers, c.ForceWorkers); err != nil {
		return fmt.Errorf("%w", err)
	}
	if err := c.Net.Validate(); err != nil {
		return fmt.Errorf("%w", err)
	}
	return nil
}

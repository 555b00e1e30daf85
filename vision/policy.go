// Package vision holds the policy interface that every policy family,
// weights file, scripted expert and external process satisfies, and the
// episode loop that joins a game, the patch pipeline and a policy.
//
// Sub-packages hold the families (nets), weights files (weights), training
// (train), statistics (stats), studies (study), reports (report) and the
// external-policy protocol (remote).
package vision

import (
	"image"

	"tilebench/games"
	"tilebench/patch"
)

// Observation is what a policy sees at one step. Its buffers belong to the
// episode loop and are reused at the next step: a policy that keeps
// anything across steps must copy it.
type Observation struct {
	// Tokens is the (transformed) token set: any N, tokens may have been
	// dropped, added or scrambled; Tokens.Pos gives each token's grid cell
	// (patch.NoCell for added tokens).
	Tokens *patch.TokenSet
	// Grid is the geometry the tokens were cut on.
	Grid *patch.Grid
	// PrevAction is the action taken at the previous step (zeros at the
	// first step), len = the game's action dimension.
	PrevAction []float64
	// Frame is the frame reassembled from Tokens (scrambled and occluded
	// as the tokens are), filled only for policies whose Info says
	// WantsFrame; otherwise nil.
	Frame *image.RGBA
	// Step is the step index within the episode, from 0.
	Step int
}

// Info describes a policy for outputs and for the checks that apply to it.
type Info struct {
	// Family is the family name ("attention", "posattention", "mlp",
	// "meanpool", "expert", "external").
	Family string
	// Label is a short human description for reports.
	Label string
	// Invariant is true for families whose action must not change when
	// the tokens are permuted.
	Invariant bool
	// ReadsState is true for policies that read the true game state
	// rather than the observation (the scripted experts). Every output
	// labels them as such.
	ReadsState bool
	// WantsFrame asks the episode loop to fill Observation.Frame.
	WantsFrame bool
	// Blind is true for policies that read neither Observation.Tokens
	// nor Observation.Frame (the scripted experts, the idle and random
	// baselines): the episode loop then does not render, tokenize or
	// transform frames for them, unless a StepHook is given.
	Blind bool
}

// Policy maps observations to actions. Implementations preallocate their
// buffers so that Act does not allocate in steady state.
type Policy interface {
	// Info describes the policy.
	Info() Info
	// Reset is called at the start of every episode.
	Reset(seed uint64)
	// Act writes the action for obs into action, whose length is the
	// game's action dimension (for a discrete game, one value holding the
	// choice index).
	Act(obs *Observation, action []float64) error
}

// ExpertPolicy wraps a game's scripted expert as a Policy. It ignores the
// observation and reads the game's true state.
type ExpertPolicy struct {
	expert games.Expert
}

// NewExpertPolicy returns the expert of g as a policy, or false if g ships
// no expert.
func NewExpertPolicy(g games.Game) (*ExpertPolicy, bool) {
	w, ok := g.(games.WithExpert)
	if !ok {
		return nil, false
	}
	return &ExpertPolicy{expert: w.Expert()}, true
}

// Info reports the expert as reading game state.
func (p *ExpertPolicy) Info() Info {
	return Info{Family: "expert", Label: "scripted expert (reads game state, not pixels)", ReadsState: true, Blind: true}
}

// Reset does nothing: the expert follows the game.
func (p *ExpertPolicy) Reset(uint64) {}

// Act asks the expert.
func (p *ExpertPolicy) Act(_ *Observation, action []float64) error {
	p.expert.Act(action)
	return nil
}

// Caution goes with every result that could lead someone to deploy a
// policy on a vehicle or robot: reports, summaries and trained weights.
const Caution = "Simulated robustness is not a safety certification; defer to the applicable safety standards, local regulations and licensed practice."

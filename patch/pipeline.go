package patch

import (
	"image"
)

// This file fixes the public API of the tokenizer and the transform
// pipeline that the rest of tilebench builds on. The implementation lives
// beside it.

// Tokenizer cuts frames into token sets on one Grid and puts token sets
// back together. It holds no per-frame state beyond scratch buffers, so
// one Tokenizer serves one goroutine.
type Tokenizer struct {
	g *Grid
	// sum and cnt accumulate overlapping tokens in Assemble; generic is
	// the scratch frame of the generic Tokenize path. All are allocated on
	// first use and reused.
	sum     []float32
	cnt     []uint32
	generic *image.RGBA
	pal     *[256][3]uint8
}

// NewTokenizer returns a tokenizer for g.
func NewTokenizer(g *Grid) *Tokenizer { return &Tokenizer{g: g} }

// Grid returns the tokenizer's grid.
func (t *Tokenizer) Grid() *Grid { return t.g }

// Tokenize fills dst with the tokens of img, in grid order. img must be
// Width×Height (its bounds may start anywhere). dst must have room for
// Grid().N() tokens of Grid().D() values; it is not reallocated.
func (t *Tokenizer) Tokenize(img image.Image, dst *TokenSet) error {
	return t.tokenize(img, dst)
}

// Assemble draws ts back into dst (OutW×OutH): each token at its Pos;
// overlapping tokens are averaged; cells with no token are filled black;
// tokens with Pos NoCell are skipped.
func (t *Tokenizer) Assemble(ts *TokenSet, dst *image.RGBA) error {
	return t.assemble(ts, dst)
}

// Spec names the transforms of a pipeline in the spelling of the CLI
// flags. The zero value is the identity pipeline.
type Spec struct {
	// Scramble is "none" (or ""), "full", "partial:F" or "local:K".
	Scramble string
	// Every is the scramble schedule: 0 draws one permutation per
	// sequence (episode), T > 0 draws a new one every T steps.
	Every int
	// Rotate and Flip turn or mirror each scrambled patch by a random
	// multiple of 90° / a random flip.
	Rotate, Flip bool
	// Occlude is "none" (or ""), "random:R", "block:R", "bands:R",
	// "sweep:R" or "mask:FILE.png".
	Occlude string
	// Fill is what an occluded token becomes: "black" (default), "mean",
	// "noise" or "drop".
	Fill string
	// NoiseTokens adds this many tokens of uniform noise.
	NoiseTokens int
	// Duplicates adds this many copies of randomly chosen tokens.
	Duplicates int
	// Brightness adds to every value; Contrast scales values about 0.5
	// (0 means 1, unchanged); Shift adds per channel; PixelNoise is the
	// standard deviation of Gaussian noise added to every value. Values
	// are clamped to [0,1] afterwards.
	Brightness, Contrast float64
	Shift                [3]float64
	PixelNoise           float64
}

// Pipeline applies a Spec to token sets, step after step, drawing all its
// randomness from one seed.
type Pipeline struct {
	g    *Grid
	spec Spec
}

// NewPipeline checks spec against g and builds the pipeline.
func NewPipeline(g *Grid, spec Spec) (*Pipeline, error) {
	return newPipeline(g, spec)
}

// Capacity is the largest number of tokens Apply can produce.
func (p *Pipeline) Capacity() int { return p.g.N() + p.spec.NoiseTokens + p.spec.Duplicates }

// Reset starts a new sequence (episode) drawing from seed.
func (p *Pipeline) Reset(seed uint64) { p.reset(seed) }

// Apply transforms src (a full token set in grid order, for step t of the
// sequence) into dst, which must have room for Capacity() tokens. If rec
// is not nil it is filled with what was done (reusing its slices).
func (p *Pipeline) Apply(t int, src, dst *TokenSet, rec *FrameRecord) error {
	return p.apply(t, src, dst, rec)
}

// FrameRecord is what the pipeline did to one frame: enough to invert the
// scramble exactly and to check a replay.
type FrameRecord struct {
	// Frame is the step index t.
	Frame int `json:"frame"`
	// Perm[i] is the grid-order index of the source token that output
	// token i came from (-1 for an added token).
	Perm []int `json:"perm"`
}

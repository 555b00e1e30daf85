package patch

import (
	"fmt"
	"image"
	"math/rand/v2"
)

// This file fixes the public API of the tokenizer and the transform
// pipeline that the rest of tilebench builds on. The implementation lives
// beside it (tokenize.go, spec.go, apply.go, manifest.go).

// Tokenizer cuts frames into token sets on one Grid and puts token sets
// back together. It holds no per-frame state beyond scratch buffers, so
// one Tokenizer serves one goroutine.
type Tokenizer struct {
	g *Grid
	// sum and cnt accumulate overlapping tokens in Assemble, cellTok
	// finds the token of each cell of a non-overlapping grid; generic is
	// the scratch frame of the generic Tokenize path; pal the palette
	// table of the paletted path. All are allocated on first use and
	// reused.
	sum     []float32
	cnt     []uint32
	cellTok []int32
	generic *image.RGBA
	pal     *[256][3]uint8
}

// NewTokenizer returns a tokenizer for g.
func NewTokenizer(g *Grid) *Tokenizer { return &Tokenizer{g: g} }

// Grid returns the tokenizer's grid.
func (t *Tokenizer) Grid() *Grid { return t.g }

// Tokenize fills dst with the tokens of img, in grid order. img must be
// Width×Height (its bounds may start anywhere). dst must have room for
// Grid().N() tokens of Grid().D() values; it is not reallocated. See
// tokenize.go for the value of each pixel type and the luma rule.
// *image.RGBA, *image.NRGBA, *image.Gray, *image.YCbCr and
// *image.Paletted frames allocate nothing after the first call; other
// image types go through image/draw and its Color values.
func (t *Tokenizer) Tokenize(img image.Image, dst *TokenSet) error {
	return t.tokenize(img, dst)
}

// Assemble draws ts back into dst (OutW×OutH): each token at its Pos;
// overlapping tokens are averaged; cells with no token are filled black;
// tokens with Pos NoCell are skipped. Values are rounded to the nearest
// byte, so Assemble(Tokenize(f)) = f for a frame the grid divides.
func (t *Tokenizer) Assemble(ts *TokenSet, dst *image.RGBA) error {
	return t.assemble(ts, dst)
}

// Spec names the transforms of a pipeline in the spelling of the CLI
// flags. The zero value is the identity pipeline. Spec.Check validates a
// spec; Spec.String and ParseSpec turn it into one line and back.
type Spec struct {
	// Scramble is "none" (or ""), "full", "partial:F" or "local:K".
	//   - full: a uniformly random permutation of all tokens.
	//   - partial:F: round-half-even(F·N) tokens, chosen uniformly, are
	//     moved among themselves along one random cycle (Sattolo's
	//     algorithm), so each of them leaves its cell when there are at
	//     least two; the others stay.
	//   - local:K: every token moves at most K cells along each axis
	//     (a jittered sort of each row, then of each column).
	Scramble string `json:"scramble,omitempty"`
	// Every is the scramble schedule: 0 draws one permutation per
	// sequence (episode), T > 0 draws a new one every T steps (1 = every
	// step).
	Every int `json:"every,omitempty"`
	// Rotate turns each token by a random multiple of 90° and Flip
	// mirrors it left-right with probability 1/2 (flip first, then turn).
	// Drawn with the scramble, so they follow its schedule. Rotate needs
	// square patches.
	Rotate bool `json:"rotate,omitempty"`
	Flip   bool `json:"flip,omitempty"`
	// Occlude is "none" (or ""), "random:R", "block:R", "bands:R"
	// (also "bands:R:h" or "bands:R:v"), "sweep:R" (also "sweep:R:P") or
	// "mask:FILE.png". R in [0,1] is the fraction of the N cells hidden:
	// exactly round-half-even(R·N) of them for every kind. See apply.go
	// for each shape.
	Occlude string `json:"occlude,omitempty"`
	// Fill is what an occluded token becomes: "black" (default, all
	// values 0), "mean" (the frame's per-channel mean), "noise" (uniform
	// values in [0,1)) or "drop" (the token is removed from the set).
	Fill string `json:"fill,omitempty"`
	// NoiseTokens adds this many tokens of uniform noise (Pos NoCell).
	NoiseTokens int `json:"noise_tokens,omitempty"`
	// Duplicates adds this many copies of randomly chosen tokens (each
	// keeps the Pos of its original).
	Duplicates int `json:"duplicates,omitempty"`
	// Brightness adds to every value (in [-1,1]); Contrast scales values
	// about 0.5 (0 means 1, unchanged; in [0,10]); Shift adds per channel
	// (R, G, B; grey uses Shift[0]; each in [-1,1]); PixelNoise is the
	// standard deviation of Gaussian noise added to every value (in
	// [0,1]). Values are clamped to [0,1] afterwards.
	Brightness float64    `json:"brightness,omitempty"`
	Contrast   float64    `json:"contrast,omitempty"`
	Shift      [3]float64 `json:"shift,omitzero"`
	PixelNoise float64    `json:"pixel_noise,omitempty"`
	// Corrupt is a comma list of frame corruptions applied to the frame,
	// in pixels, before it is tokenized (Pipeline.TokenizeFrame), in the
	// order written: blur:S, motionblur:L[:ANGLE], resolution:F, jpeg:Q,
	// gamma:G, sharpen:S, saltpepper:R, dead:R, shift:DX[:DY][:MODE],
	// shake:A[:MODE], rotate:DEGREES, scale:S; each also as KIND:s1 to
	// KIND:s5, a severity level. See corrupt.go for each kind, its
	// severity table and what fills uncovered pixels. "" or "none": none.
	Corrupt string `json:"corrupt,omitempty"`
}

// Pipeline applies a Spec to token sets, step after step, drawing all its
// randomness from one seed. The transforms run in this order:
//
//  1. photometric: brightness, contrast, shift, pixel noise, clamp;
//  2. occlude: the occluded source cells of step t get the fill value;
//  3. scramble (with rotations and flips): output token i sits in cell
//     Cell(i) and carries the data of source token Perm[i];
//  4. drop: with fill "drop", tokens whose source cell is occluded are
//     removed (the rest keep their order);
//  5. noise tokens are appended, then duplicates of the remaining real
//     tokens.
//
// Frame corruptions (Spec.Corrupt) come before all of these: they act on
// the frame, so a caller tokenizes through TokenizeFrame.
//
// A Pipeline allocates nothing per step (a JPEG corruption excepted: the
// standard library's codec allocates); one Pipeline serves one goroutine.
type Pipeline struct {
	g    *Grid
	spec Spec
	x    pipeState
	pcg  *rand.PCG
	rng  *rand.Rand
	corr *corrState // nil without frame corruptions
}

// NewPipeline checks spec against g and builds the pipeline. A mask file
// named by spec.Occlude is read here.
func NewPipeline(g *Grid, spec Spec) (*Pipeline, error) {
	return newPipeline(g, spec)
}

// Capacity is the largest number of tokens Apply can produce.
func (p *Pipeline) Capacity() int { return p.g.N() + p.spec.NoiseTokens + p.spec.Duplicates }

// Reset starts a new sequence (episode) drawing from seed.
func (p *Pipeline) Reset(seed uint64) { p.reset(seed) }

// Apply transforms src (a full token set in grid order, for step t of the
// sequence) into dst, which must have room for Capacity() tokens. If rec
// is not nil it is filled with what was done (reusing its slices). The
// result depends only on the seed given to Reset, t and src, not on the
// order of calls.
func (p *Pipeline) Apply(t int, src, dst *TokenSet, rec *FrameRecord) error {
	return p.apply(t, src, dst, rec)
}

// TokenizeFrame tokenizes img, the frame of step t, with tok, after
// applying the spec's frame corruptions to a copy of it (in buffers the
// pipeline owns; img is not changed). Without corruptions it is
// tok.Tokenize(img, dst). tok's grid must have the pipeline grid's source
// size. Random corruptions (saltpepper, shake; dead per sequence) draw
// from the seed given to Reset, so the result depends only on that seed,
// t and img.
func (p *Pipeline) TokenizeFrame(t int, tok *Tokenizer, img image.Image, dst *TokenSet) error {
	if p.corr == nil || len(p.corr.ops) == 0 {
		return tok.Tokenize(img, dst)
	}
	f, err := p.CorruptFrame(t, img)
	if err != nil {
		return err
	}
	return tok.Tokenize(f, dst)
}

// CorruptFrame returns img (of the grid's source size) with the spec's
// frame corruptions for step t applied, in a frame the pipeline owns that
// stays valid until the next call. Without corruptions it returns a copy
// of img.
func (p *Pipeline) CorruptFrame(t int, img image.Image) (*image.RGBA, error) {
	if t < 0 {
		return nil, fmt.Errorf("corrupt: step %d is negative", t)
	}
	if p.corr == nil {
		s, err := newCorrState(p.g, nil)
		if err != nil {
			return nil, err
		}
		p.corr = s // no steps: CorruptFrame copies, Apply records nothing
	}
	return p.corr.run(p, t, img)
}

// FrameRecord is what the pipeline did to one frame: enough to invert the
// scramble exactly and to check a replay. Output tokens come in three
// runs: Real scrambled source tokens, then Noise noise tokens, then Dups
// duplicates.
type FrameRecord struct {
	// Frame is the step index t.
	Frame int `json:"frame"`
	// Perm[i] is the grid-order index of the source token that output
	// token i came from (-1 for a noise token; a duplicate names the
	// source token it copies).
	Perm []int `json:"perm"`
	// Orient[i] is how output token i was turned: bit 2 set means
	// mirrored left-right, bits 0–1 the number of clockwise quarter turns
	// after the mirror. Empty when the spec neither rotates nor flips.
	Orient []int `json:"orient,omitempty"`
	// Cells lists the cell (grid-order index) that each real output token
	// sits in, when fill "drop" removed tokens; it is empty otherwise, and
	// then real output token i sits in cell i.
	Cells []int `json:"cells,omitempty"`
	// Mask lists the occluded source cells (grid-order indices,
	// ascending).
	Mask []int `json:"mask"`
	// Real, Noise and Dups count the three runs of output tokens.
	Real  int `json:"real"`
	Noise int `json:"noise"`
	Dups  int `json:"dups"`
	// Epoch is the scramble draw in force: 0 with Every 0, else t/Every.
	Epoch int `json:"epoch"`
	// Params are the settings applied to this frame.
	Params FrameParams `json:"params"`
	// Offset is the translation (dx, dy) in pixels that the spec's shift
	// and shake corruptions gave this frame (a pixel moved from (x, y) to
	// (x+dx, y+dy)); shift:−dx:−dy undoes it (exactly with mode wrap).
	// Zero, and left out, otherwise.
	Offset [2]int `json:"offset,omitzero"`
}

// FrameParams are the numeric settings a pipeline applied to one frame.
type FrameParams struct {
	Brightness float64    `json:"brightness"`
	Contrast   float64    `json:"contrast"`
	Shift      [3]float64 `json:"shift"`
	PixelNoise float64    `json:"pixel_noise"`
	// Mean is the per-channel fill value used by fill "mean" (zero
	// otherwise).
	Mean [3]float32 `json:"mean"`
}

package invariance

import (
	"errors"
	"fmt"
	"image"
	"image/color"
	"math"
	"strings"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
)

// blobs is a small deterministic game for the tests: coloured squares that
// drift with the step count; continuous (2 values) or discrete (3 choices).
type blobs struct {
	discrete bool
	seed     uint64
	t        int
}

func (b *blobs) Spec() games.Spec {
	sp := games.Spec{Name: "blobs", Width: 32, Height: 32, StepLimit: 100}
	if b.discrete {
		sp.Action = games.Controls{Kind: games.Discrete, Names: []string{"a", "b", "c"}}
	} else {
		sp.Action = games.Controls{Kind: games.Continuous, Names: []string{"x", "y"}, Low: []float64{-1, -1}, High: []float64{1, 1}}
	}
	return sp
}
func (b *blobs) Reset(seed uint64) { b.seed, b.t = seed, 0 }
func (b *blobs) Step(a []float64) (games.Step, error) {
	if err := b.Spec().Action.Check(a); err != nil {
		return games.Step{}, err
	}
	b.t++
	return games.Step{Reward: 1, Done: b.t >= 100, Reason: games.TimeUp}, nil
}
func (b *blobs) Render(dst *image.RGBA) {
	r := patch.NewRand(patch.DeriveSeed(b.seed, uint64(b.t)))
	for y := 0; y < 32; y++ {
		for x := 0; x < 32; x++ {
			dst.SetRGBA(x, y, color.RGBA{uint8(r.IntN(256)), uint8((x + b.t) * 7), uint8(y * 8), 255})
		}
	}
}

// sumPolicy is permutation invariant: the mean and the largest value over
// all tokens (accumulated in float64, so order changes only rounding).
type sumPolicy struct{}

func (p *sumPolicy) Info() vision.Info { return vision.Info{Family: "sum", Invariant: true} }
func (p *sumPolicy) Reset(uint64)      {}
func (p *sumPolicy) Act(obs *vision.Observation, a []float64) error {
	var s, m float64
	ts := obs.Tokens
	for _, v := range ts.Data[:ts.N*ts.D] {
		s += float64(v)
		m = max(m, float64(v))
	}
	a[0] = s / float64(ts.N*ts.D)
	if len(a) > 1 {
		a[1] = m
	} else {
		a[0] = math.Floor(a[0] * 2.999)
	}
	return nil
}

// orderPolicy weighs tokens by their index in the set: not invariant.
type orderPolicy struct{ claim bool }

func (p *orderPolicy) Info() vision.Info { return vision.Info{Family: "order", Invariant: p.claim} }
func (p *orderPolicy) Reset(uint64)      {}
func (p *orderPolicy) Act(obs *vision.Observation, a []float64) error {
	var s float64
	ts := obs.Tokens
	for i := 0; i < ts.N; i++ {
		s += float64(ts.Token(i)[0]) * float64(i+1) / float64(ts.N)
	}
	a[0] = s / float64(ts.N)
	if len(a) > 1 {
		a[1] = 0
	}
	return nil
}

// posPolicy weighs each token by its grid cell: invariant to the order of
// the set (each token keeps its Pos) but not to scrambled contents.
type posPolicy struct{}

func (p *posPolicy) Info() vision.Info { return vision.Info{Family: "pos", Invariant: true} }
func (p *posPolicy) Reset(uint64)      {}
func (p *posPolicy) Act(obs *vision.Observation, a []float64) error {
	var s float64
	ts := obs.Tokens
	for i := 0; i < ts.N; i++ {
		w := float64(int(ts.Pos[i].Row)*7 + int(ts.Pos[i].Col) + 2)
		s += float64(ts.Token(i)[1]) * w
	}
	a[0], a[1] = s/1000, 0
	return nil
}

// fixedPolicy refuses any set that is not the full grid.
type fixedPolicy struct{ sumPolicy }

func (p *fixedPolicy) Info() vision.Info { return vision.Info{Family: "fixed"} }
func (p *fixedPolicy) Act(obs *vision.Observation, a []float64) error {
	if obs.Tokens.N != obs.Grid.N() {
		return fmt.Errorf("needs %d tokens, got %d", obs.Grid.N(), obs.Tokens.N)
	}
	return p.sumPolicy.Act(obs, a)
}

func setup(t *testing.T, discrete bool) (games.Game, *patch.Tokenizer) {
	t.Helper()
	g, tok := blobsGame()
	g.discrete = discrete
	return g, tok
}

func blobsGame() (*blobs, *patch.Tokenizer) {
	gr, err := patch.NewGrid(patch.GridConfig{Width: 32, Height: 32, PatchW: 8})
	if err != nil {
		panic(err)
	}
	return &blobs{}, patch.NewTokenizer(gr)
}

var small = Config{Perms: 20, Seeds: []uint64{1, 2}, Frames: 3}

func TestInvariantPolicyPasses(t *testing.T) {
	g, tok := setup(t, false)
	r, err := Run(g, tok, &sumPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Pass || r.Err() != nil || r.Permute.Max > 1e-12 || r.Scramble.Max > 1e-12 {
		t.Fatalf("invariant policy: %+v", r)
	}
	if r.Permute.Count != 2*3*20 || r.Frames != 6 || r.Tokens != 16 || r.Format != 1 {
		t.Fatalf("counts: %+v", r)
	}
	// Noise and drop do change a mean.
	if r.Noised.Max <= 0 || r.Dropped.Max <= 0 || r.Noised.Mean <= 0 || r.Noised.Mean > r.Noised.Max {
		t.Fatalf("noise/drop sensitivity not measured: %+v %+v", r.Noised, r.Dropped)
	}
}

func TestOrderSensitivePolicyIsMeasured(t *testing.T) {
	g, tok := setup(t, false)
	r, err := Run(g, tok, &orderPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if !r.Pass || r.Permute.Max < 1e-4 || r.Permute.Mean <= 0 {
		t.Fatalf("non-invariant family should be measured, not failed: %+v", r.Permute)
	}
	// The same policy claiming invariance fails with the figure.
	r2, err := Run(g, tok, &orderPolicy{claim: true}, small)
	if err != nil {
		t.Fatal(err)
	}
	err = r2.Err()
	if r2.Pass || !errors.Is(err, ErrNotInvariant) || !strings.Contains(err.Error(), fmt.Sprintf("%.3g", r2.Permute.Max)) {
		t.Fatalf("claimed invariance: pass %v, err %v", r2.Pass, err)
	}
	if r2.Permute.Max != r.Permute.Max {
		t.Fatalf("same seeds gave %v and %v", r2.Permute.Max, r.Permute.Max)
	}
}

// Permutation keeps each token's Pos; scrambling moves contents to other
// cells. A position-weighted policy separates the two.
func TestPermuteKeepsPositionsScrambleDoesNot(t *testing.T) {
	g, tok := setup(t, false)
	r, err := Run(g, tok, &posPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if r.Permute.Max > 1e-12 || !r.Pass {
		t.Fatalf("permute changed a position-weighted sum: %+v", r.Permute)
	}
	if r.Scramble.Max < 1e-3 {
		t.Fatalf("scramble did not move contents: %+v", r.Scramble)
	}
}

func TestFixedSizeRefusalsAreCounted(t *testing.T) {
	g, tok := setup(t, false)
	r, err := Run(g, tok, &fixedPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if r.Noised.Refused != 120 || r.Dropped.Refused != 120 || r.Noised.Count != 0 || !strings.Contains(r.Noised.Reason, "needs 16") {
		t.Fatalf("refusals: %+v %+v", r.Noised, r.Dropped)
	}
}

func TestDiscreteChangeIsChoiceFlip(t *testing.T) {
	g, tok := setup(t, true)
	r, err := Run(g, tok, &sumPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range []Stat{r.Permute, r.Scramble, r.Noised, r.Dropped} {
		if s.Max != 0 && s.Max != 1 {
			t.Fatalf("discrete change %v, want 0 or 1", s.Max)
		}
	}
}

type nanPolicy struct{ sumPolicy }

func (p *nanPolicy) Act(obs *vision.Observation, a []float64) error {
	a[0], a[1] = math.NaN(), 0
	return nil
}

func TestNonFiniteActionIsAnError(t *testing.T) {
	g, tok := setup(t, false)
	_, err := Run(g, tok, &nanPolicy{}, small)
	if err == nil || !strings.Contains(err.Error(), "NaN") {
		t.Fatalf("NaN action: %v", err)
	}
}

func TestDefaultsAndProgress(t *testing.T) {
	g, tok := setup(t, false)
	calls := 0
	r, err := Run(g, tok, &sumPolicy{}, Config{Perms: 2, Progress: func(done, total int) { calls++ }})
	if err != nil {
		t.Fatal(err)
	}
	if calls != 12 || r.Frames != 12 || r.Noise != 1 || r.Drop != 1 || r.Tol != DefaultTol {
		t.Fatalf("defaults: calls %d, %+v", calls, r)
	}
}

// outPolicy has a raw output (three logits) beside its discrete choice.
type outPolicy struct{ orderPolicy }

func (p *outPolicy) OutputDim() int { return 3 }
func (p *outPolicy) Forward(obs *vision.Observation, out []float32) error {
	var a [2]float64
	p.orderPolicy.Act(obs, a[:])
	out[0], out[1], out[2] = float32(a[0]), float32(-a[0]), 0.5
	return nil
}

func TestDiscreteOutputterComparesLogits(t *testing.T) {
	g, tok := setup(t, true)
	r, err := Run(g, tok, &outPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if r.Compared != "output" || r.Permute.Max <= 0 || r.Permute.Max >= 1 || r.Permute.Max == math.Trunc(r.Permute.Max) {
		t.Fatalf("logit change %+v (compared %s)", r.Permute, r.Compared)
	}
}

// The families of vision/nets: the invariant ones hold the bound with
// float32 arithmetic, the others show their order sensitivity.
func TestNetFamilies(t *testing.T) {
	for _, discrete := range []bool{false, true} {
		g, tok := setup(t, discrete)
		for _, fam := range nets.Families {
			n, err := nets.New(nets.Config{Family: fam}, tok.Grid(), g.Spec().Action, 3)
			if err != nil {
				t.Fatal(err)
			}
			r, err := Run(g, tok, n, Config{Perms: 10, Seeds: []uint64{5}, Frames: 2})
			if err != nil {
				t.Fatalf("%s: %v", fam, err)
			}
			inv := n.Info().Invariant
			switch {
			case inv && (!r.Pass || r.Permute.Max > DefaultTol):
				t.Errorf("%s (discrete %v): invariant family moved %g under permutation", fam, discrete, r.Permute.Max)
			case fam == nets.MLP && r.Permute.Max < 1e-6:
				t.Errorf("mlp (discrete %v): no sensitivity to token order (%g)", discrete, r.Permute.Max)
			case fam == nets.PosAttention && r.Scramble.Max < 1e-6:
				t.Errorf("posattention (discrete %v): no sensitivity to scrambled contents (%g)", discrete, r.Scramble.Max)
			case inv && r.Noised.Max == 0:
				t.Errorf("%s (discrete %v): noise tokens changed nothing", fam, discrete)
			}
			if r.Compared != "output" {
				t.Errorf("%s: compared %s", fam, r.Compared)
			}
		}
	}
}

// BenchmarkRun is one frame measured under 10 draws of each perturbation
// with a trivial policy: the checker's own overhead.
func BenchmarkRun(b *testing.B) {
	g, tok := blobsGame()
	cfg := Config{Perms: 10, Seeds: []uint64{1}, Frames: 1}
	b.ReportAllocs()
	for b.Loop() {
		if _, err := Run(g, tok, &sumPolicy{}, cfg); err != nil {
			b.Fatal(err)
		}
	}
}

// Frame corruptions on the driving game: for the invariant families a
// shift by whole patches with wrap-around edges only moves tokens between
// cells (patch's TestCorruptWholePatchShiftRelabels), so the action stays
// within the permutation bound; a shift by part of a patch changes what
// every token holds, and the action moves.
func TestCorruptShiftOnInvariantFamilies(t *testing.T) {
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	p := 0
	for _, c := range []int{8, 6, 4, 5, 3, 2} {
		if sp.Width%c == 0 && sp.Height%c == 0 {
			p = c
			break
		}
	}
	if p == 0 {
		t.Skipf("no small patch size divides the %dx%d frame", sp.Width, sp.Height)
	}
	gr, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: p, Edge: patch.EdgeStrict})
	if err != nil {
		t.Fatal(err)
	}
	tok := patch.NewTokenizer(gr)
	for _, fam := range nets.Families {
		n, err := nets.New(nets.Config{Family: fam}, gr, sp.Action, 3)
		if err != nil {
			t.Fatal(err)
		}
		if !n.Info().Invariant {
			continue
		}
		whole := fmt.Sprintf("shift:%d:%d:wrap", p, -2*p)
		sub := fmt.Sprintf("shift:%d:0:wrap", p/2+1)
		cfg := Config{Perms: 1, Seeds: []uint64{games.HeldOut(0)}, Frames: 3}
		cfg.Corrupt = whole
		rw, err := Run(g, tok, n, cfg)
		if err != nil {
			t.Fatal(err)
		}
		cfg.Corrupt = sub
		rs, err := Run(g, tok, n, cfg)
		if err != nil {
			t.Fatal(err)
		}
		if rw.Corrupted == nil || rw.Corrupt != whole || rw.Corrupted.Count != rw.Frames {
			t.Fatalf("%s: report %+v", fam, rw)
		}
		if rw.Corrupted.Max > DefaultTol {
			t.Errorf("%s: whole-patch shift %s moved the output by %g", fam, whole, rw.Corrupted.Max)
		}
		if rs.Corrupted.Max < 1e-4 {
			t.Errorf("%s: sub-patch shift %s moved the output by only %g", fam, sub, rs.Corrupted.Max)
		}
		t.Logf("%s: whole-patch %s max %.2g, sub-patch %s max %.2g", fam, whole, rw.Corrupted.Max, sub, rs.Corrupted.Max)
	}
}

// With a base transform that hides every cell, scrambling moves black
// cells among black cells: a position-weighted policy that scrambling
// moves on clean frames does not move at all. A pipeline that changes the
// token count is refused.
func TestBasePipeline(t *testing.T) {
	g, tok := setup(t, false)
	pipe, err := patch.NewPipeline(tok.Grid(), patch.Spec{Occlude: "random:1", Fill: "black"})
	if err != nil {
		t.Fatal(err)
	}
	cfg := small
	cfg.Pipe = pipe
	r, err := Run(g, tok, &posPolicy{}, cfg)
	if err != nil {
		t.Fatal(err)
	}
	clean, err := Run(g, tok, &posPolicy{}, small)
	if err != nil {
		t.Fatal(err)
	}
	if clean.Scramble.Max < 1e-3 || r.Scramble.Max != 0 {
		t.Fatalf("scramble moved the action by %g on clean frames, %g on black ones (want > 0 and 0)", clean.Scramble.Max, r.Scramble.Max)
	}
	for _, s := range []patch.Spec{{NoiseTokens: 2}, {Occlude: "random:0.5", Fill: "drop"}} {
		p, err := patch.NewPipeline(tok.Grid(), s)
		if err != nil {
			t.Fatal(err)
		}
		cfg.Pipe = p
		if _, err := Run(g, tok, &posPolicy{}, cfg); err == nil || !strings.Contains(err.Error(), "one token per cell") {
			t.Errorf("%s: %v", s, err)
		}
	}
}

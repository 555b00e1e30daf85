package patch

import (
	"bytes"
	"image"
	"math/big"
	"strconv"
	"strings"
	"testing"
)

// tokensOf tokenizes a random frame for g.
func tokensOf(t testing.TB, g *Grid, seed uint64) (*Tokenizer, *image.RGBA, *TokenSet) {
	t.Helper()
	tk := NewTokenizer(g)
	f := randomRGBA(g.Width, g.Height, seed)
	ts := NewTokenSet(g.N(), g.D())
	if err := tk.Tokenize(f, ts); err != nil {
		t.Fatal(err)
	}
	return tk, f, ts
}

func mustPipe(t testing.TB, g *Grid, s Spec) *Pipeline {
	t.Helper()
	p, err := NewPipeline(g, s)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestIdentityPipeline(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 32, Height: 24, PatchW: 8})
	_, _, src := tokensOf(t, g, 1)
	p := mustPipe(t, g, Spec{})
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(0, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	if dst.N != src.N || !equalF32(dst.Data[:dst.N*dst.D], src.Data) {
		t.Fatal("identity pipeline changed the tokens")
	}
	for i, j := range rec.Perm {
		if i != j || dst.Pos[i] != g.Cell(i) {
			t.Fatalf("identity perm[%d] = %d, pos %v", i, j, dst.Pos[i])
		}
	}
}

func equalF32(a, b []float32) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// unscramble(scramble(f)) = f byte for byte, with rotations and flips.
func TestUnscrambleRoundTrip(t *testing.T) {
	for _, s := range []Spec{
		{Scramble: "full"},
		{Scramble: "full", Rotate: true, Flip: true},
		{Scramble: "partial:0.5", Flip: true},
		{Scramble: "local:1", Rotate: true},
		{Scramble: "local:2", Every: 3},
		{Scramble: "full", NoiseTokens: 5, Duplicates: 3, Rotate: true},
	} {
		g := mustGrid(t, GridConfig{Width: 48, Height: 40, PatchW: 8})
		tk, f, src := tokensOf(t, g, 9)
		p := mustPipe(t, g, s)
		p.Reset(42)
		dst := NewTokenSet(p.Capacity(), g.D())
		back := NewTokenSet(g.N(), g.D())
		var rec FrameRecord
		img := image.NewRGBA(image.Rect(0, 0, g.OutW, g.OutH))
		for step := 0; step < 5; step++ {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			if err := rec.Unscramble(g, dst, back); err != nil {
				t.Fatal(err)
			}
			if err := tk.Assemble(back, img); err != nil {
				t.Fatal(err)
			}
			if !bytes.Equal(img.Pix, f.Pix) {
				t.Fatalf("%v step %d: unscrambled frame differs", s, step)
			}
			if !equalF32(back.Data[:back.N*back.D], src.Data) {
				t.Fatalf("%v step %d: unscrambled tokens differ", s, step)
			}
		}
	}
}

// Scramble semantics: output token i sits in cell Cell(i) and carries the
// data of source token Perm[i].
func TestScrambleSemantics(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 40, Height: 32, PatchW: 8})
	_, _, src := tokensOf(t, g, 4)
	p := mustPipe(t, g, Spec{Scramble: "full"})
	p.Reset(3)
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(0, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	moved := 0
	for i, j := range rec.Perm {
		if dst.Pos[i] != g.Cell(i) {
			t.Fatalf("token %d at %v, want %v", i, dst.Pos[i], g.Cell(i))
		}
		if !equalF32(dst.Token(i), src.Token(j)) {
			t.Fatalf("token %d does not carry source %d", i, j)
		}
		if i != j {
			moved++
		}
	}
	if moved < g.N()/2 {
		t.Fatalf("full scramble moved only %d of %d tokens", moved, g.N())
	}
}

// expectedCount is round-half-even(R·N) for a decimal string R, computed
// with integers only (independent of the big.Rat code under test): R =
// a/10^d, so R·N = a·N/10^d; round half to even by comparing twice the
// remainder with the divisor (the IEEE 754 roundTiesToEven rule).
func expectedCount(r string, n int) int {
	whole, frac, _ := strings.Cut(r, ".")
	a, _ := strconv.Atoi(whole + frac)
	den := 1
	for range frac {
		den *= 10
	}
	q, m := a*n/den, a*n%den
	if 2*m > den || 2*m == den && q%2 == 1 {
		q++
	}
	return q
}

// Exact occluded counts for many (N, R), for every kind with a ratio.
func TestOcclusionCounts(t *testing.T) {
	ratios := []string{"0", "0.05", "0.1", "0.125", "0.25", "0.3", "0.333", "0.35", "0.5", "0.625", "0.75", "0.9", "1"}
	sizes := [][2]int{{1, 1}, {2, 2}, {3, 5}, {4, 4}, {7, 3}, {10, 10}, {12, 12}, {16, 9}, {20, 1}, {1, 13}}
	for _, kind := range []string{"random", "block", "bands", "bands:R:h", "bands:R:v", "sweep"} {
		for _, sz := range sizes {
			g := mustGrid(t, GridConfig{Width: sz[0] * 2, Height: sz[1] * 2, PatchW: 2, Channels: 1})
			_, _, src := tokensOf(t, g, 1)
			for _, r := range ratios {
				occ := kind + ":" + r
				if strings.Contains(kind, ":R:") {
					occ = strings.Replace(kind, ":R:", ":"+r+":", 1)
				}
				for _, fill := range []string{"black", "drop"} {
					p := mustPipe(t, g, Spec{Occlude: occ, Fill: fill})
					dst := NewTokenSet(p.Capacity(), g.D())
					var rec FrameRecord
					want := expectedCount(r, g.N())
					for seed := uint64(0); seed < 3; seed++ {
						p.Reset(seed)
						for step := 0; step < 4; step++ {
							if err := p.Apply(step, src, dst, &rec); err != nil {
								t.Fatal(err)
							}
							if len(rec.Mask) != want {
								t.Fatalf("%s on %d cells: %d occluded, want %d", occ, g.N(), len(rec.Mask), want)
							}
							if fill == "drop" && dst.N != g.N()-want {
								t.Fatalf("%s drop: %d tokens left, want %d", occ, dst.N, g.N()-want)
							}
						}
					}
				}
			}
		}
	}
}

func TestCountOfMatchesIntegerRule(t *testing.T) {
	for _, r := range []string{"0.5", "0.25", "0.125", "0.375", "0.05", "0.15", "0.45", "0.999", "0.001"} {
		rat, err := parseRatio(r, "r")
		if err != nil {
			t.Fatal(err)
		}
		for n := 0; n < 300; n++ {
			if got, want := countOf(rat, n), expectedCount(r, n); got != want {
				t.Fatalf("countOf(%s, %d) = %d, want %d", r, n, got, want)
			}
		}
	}
	// Ties go to even (IEEE 754 roundTiesToEven): 0.5·3 = 1.5 → 2, 0.5·5 = 2.5 → 2.
	half := big.NewRat(1, 2)
	if countOf(half, 3) != 2 || countOf(half, 5) != 2 || countOf(half, 7) != 4 {
		t.Fatal("round half to even broken")
	}
}

package patch

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"gonum.org/v1/gonum/stat/distuv"
)

// Permutation uniformity: chi-square goodness of fit of the 24 orderings
// of 4 tokens from 24 000 full scrambles. Critical value χ²(0.999, 23) =
// 49.728 from the NIST/SEMATECH e-Handbook of Statistical Methods, table
// 1.3.6.7.4 (upper critical values of the chi-square distribution),
// cross-checked with gonum's distuv.ChiSquared quantile.
func TestFullScrambleUniform(t *testing.T) {
	const nistCritical = 49.728
	if q := (distuv.ChiSquared{K: 23}).Quantile(0.999); math.Abs(q-nistCritical) > 0.01 {
		t.Fatalf("gonum χ²(0.999, 23) = %v, NIST table %v", q, nistCritical)
	}
	g := mustGrid(t, GridConfig{Width: 4, Height: 4, PatchW: 2, Channels: 1})
	_, _, src := tokensOf(t, g, 1)
	for _, every := range []int{0, 1} {
		p := mustPipe(t, g, Spec{Scramble: "full", Every: every})
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		counts := map[[4]int]int{}
		const draws = 24000
		for i := 0; i < draws; i++ {
			step := 0
			if every == 1 {
				// New permutations along one sequence.
				step = i
			} else {
				p.Reset(uint64(i))
			}
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			counts[[4]int(rec.Perm)]++
		}
		if len(counts) != 24 {
			t.Fatalf("every %d: %d distinct orderings, want 24", every, len(counts))
		}
		exp := float64(draws) / 24
		chi := 0.0
		for _, c := range counts {
			chi += (float64(c) - exp) * (float64(c) - exp) / exp
		}
		if chi > nistCritical {
			t.Errorf("every %d: χ² = %.2f over 24 orderings exceeds %.3f", every, chi, nistCritical)
		}
	}
}

func TestPartialScrambleMovesExactly(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 40, Height: 24, PatchW: 4, Channels: 1})
	_, _, src := tokensOf(t, g, 1)
	for _, f := range []string{"0", "0.1", "0.25", "0.5", "0.77", "1"} {
		p := mustPipe(t, g, Spec{Scramble: "partial:" + f})
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		want := expectedCount(f, g.N())
		for seed := uint64(0); seed < 20; seed++ {
			p.Reset(seed)
			if err := p.Apply(0, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			moved := 0
			for i, j := range rec.Perm {
				if i != j {
					moved++
				}
			}
			if moved != want {
				t.Fatalf("partial:%s moved %d of %d tokens, want %d", f, moved, g.N(), want)
			}
		}
	}
}

// local:K: no token moves more than K cells along either axis, and the
// result is a permutation.
func TestLocalScrambleBound(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 64, Height: 40, PatchW: 4, Channels: 1})
	_, _, src := tokensOf(t, g, 1)
	for K := 0; K <= 4; K++ {
		p := mustPipe(t, g, Spec{Scramble: "local:" + string(rune('0'+K)), Every: 1})
		p.Reset(uint64(K))
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		maxMove := 0
		for step := 0; step < 50; step++ {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			seen := make([]bool, g.N())
			for i, j := range rec.Perm {
				if seen[j] {
					t.Fatal("not a permutation")
				}
				seen[j] = true
				a, b := g.Cell(i), g.Cell(j)
				d := max(abs(int(a.Row)-int(b.Row)), abs(int(a.Col)-int(b.Col)))
				if d > K {
					t.Fatalf("local:%d moved token %d by %d cells", K, j, d)
				}
				maxMove = max(maxMove, d)
			}
		}
		if maxMove != K {
			t.Errorf("local:%d: largest move over 50 draws was %d, want %d", K, maxMove, K)
		}
	}
}

func abs(x int) int {
	if x < 0 {
		return -x
	}
	return x
}

func maskOf(t *testing.T, g *Grid, s Spec, seed uint64, step int) []int {
	t.Helper()
	_, _, src := tokensOf(t, g, 1)
	p := mustPipe(t, g, s)
	p.Reset(seed)
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(step, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	return rec.Mask
}

// block:R is one 4-connected block, its cells filled row by row in a
// bounding box with only the last row short; coverage within one token
// of R·N.
func TestBlockShape(t *testing.T) {
	for _, sz := range [][2]int{{12, 12}, {16, 9}, {5, 11}, {30, 2}} {
		g := mustGrid(t, GridConfig{Width: sz[0] * 2, Height: sz[1] * 2, PatchW: 2, Channels: 1})
		for _, r := range []string{"0.05", "0.2", "0.3", "0.5", "0.9", "1"} {
			for seed := uint64(0); seed < 5; seed++ {
				m := maskOf(t, g, Spec{Occlude: "block:" + r}, seed, 0)
				rr, _ := parseRatio(r, "")
				exact, _ := rr.Float64()
				if math.Abs(float64(len(m))-exact*float64(g.N())) > 1 {
					t.Fatalf("block:%s covers %d of %d cells", r, len(m), g.N())
				}
				if !connected(g, m) {
					t.Fatalf("block:%s on %dx%d is not one piece: %v", r, g.Cols, g.Rows, m)
				}
				minR, maxR, minC, maxC := bbox(g, m)
				area := (maxR - minR + 1) * (maxC - minC + 1)
				if area-len(m) >= maxC-minC+1 {
					t.Fatalf("block:%s: %d cells in a %d-cell box", r, len(m), area)
				}
			}
		}
	}
}

func bbox(g *Grid, m []int) (minR, maxR, minC, maxC int) {
	minR, minC = 1<<30, 1<<30
	for _, i := range m {
		p := g.Cell(i)
		minR, maxR = min(minR, int(p.Row)), max(maxR, int(p.Row))
		minC, maxC = min(minC, int(p.Col)), max(maxC, int(p.Col))
	}
	return
}

func connected(g *Grid, m []int) bool {
	if len(m) == 0 {
		return true
	}
	in := map[int]bool{}
	for _, i := range m {
		in[i] = true
	}
	seen := map[int]bool{m[0]: true}
	stack := []int{m[0]}
	for len(stack) > 0 {
		i := stack[len(stack)-1]
		stack = stack[:len(stack)-1]
		p := g.Cell(i)
		for _, d := range [][2]int{{0, 1}, {0, -1}, {1, 0}, {-1, 0}} {
			r, c := int(p.Row)+d[0], int(p.Col)+d[1]
			if r < 0 || c < 0 || r >= g.Rows || c >= g.Cols {
				continue
			}
			j := r*g.Cols + c
			if in[j] && !seen[j] {
				seen[j] = true
				stack = append(stack, j)
			}
		}
	}
	return len(seen) == len(m)
}

// bands:R are whole rows (or columns) plus at most one partial line;
// coverage within one token of R·N.
func TestBandsShape(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 20, Height: 16, PatchW: 2, Channels: 1})
	for _, dir := range []string{"h", "v", ""} {
		for _, r := range []string{"0.1", "0.25", "0.33", "0.5"} {
			spec := "bands:" + r
			if dir != "" {
				spec += ":" + dir
			}
			for seed := uint64(0); seed < 6; seed++ {
				m := maskOf(t, g, Spec{Occlude: spec}, seed, 0)
				rr, _ := parseRatio(r, "")
				exact, _ := rr.Float64()
				if math.Abs(float64(len(m))-exact*float64(g.N())) > 1 {
					t.Fatalf("%s covers %d of %d cells", spec, len(m), g.N())
				}
				rows, cols := map[int]int{}, map[int]int{}
				for _, i := range m {
					p := g.Cell(i)
					rows[int(p.Row)]++
					cols[int(p.Col)]++
				}
				lines, full := rows, g.Cols
				if len(cols) < len(rows) || dir == "v" {
					lines, full = cols, g.Rows
				}
				partial := 0
				for _, n := range lines {
					if n != full {
						partial++
					}
				}
				if partial > 1 {
					t.Fatalf("%s seed %d: %d partial lines: %v", spec, seed, partial, m)
				}
			}
		}
	}
}

// sweep:R moves its block by at most one cell a step and reaches both
// sides of the grid.
func TestSweepMoves(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 24, Height: 16, PatchW: 2, Channels: 1})
	_, _, src := tokensOf(t, g, 1)
	for _, spec := range []string{"sweep:0.1", "sweep:0.2:3"} {
		p := mustPipe(t, g, Spec{Occlude: spec})
		p.Reset(11)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		prevC, minC, maxC := -1, 1<<30, -1
		var k int
		for step := 0; step < 80; step++ {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			if step == 0 {
				k = len(rec.Mask)
			} else if len(rec.Mask) != k || !connected(g, rec.Mask) {
				t.Fatalf("%s step %d: block changed shape", spec, step)
			}
			_, _, c0, c1 := bbox(g, rec.Mask)
			if prevC >= 0 && abs(c0-prevC) > 1 {
				t.Fatalf("%s step %d: block jumped from column %d to %d", spec, step, prevC, c0)
			}
			prevC = c0
			minC, maxC = min(minC, c0), max(maxC, c1)
		}
		if minC != 0 || maxC != g.Cols-1 {
			t.Errorf("%s swept columns %d..%d, want 0..%d", spec, minC, maxC, g.Cols-1)
		}
	}
}

// mask:FILE.png: white pixels occlude; a cell is occluded when at least
// half of its pixels are; a mask of the wrong size is an error.
func TestMaskFile(t *testing.T) {
	dir := t.TempDir()
	g := mustGrid(t, GridConfig{Width: 8, Height: 4, PatchW: 2})
	m := image.NewGray(image.Rect(0, 0, 8, 4))
	// Cell (0,0): all 4 white; cell (0,1): 2 of 4 white; cell (1,3): 1 of 4.
	for _, p := range [][2]int{{0, 0}, {1, 0}, {0, 1}, {1, 1}, {2, 0}, {3, 0}, {6, 2}} {
		m.SetGray(p[0], p[1], color.Gray{Y: 255})
	}
	m.SetGray(7, 3, color.Gray{Y: 127}) // below the threshold
	path := filepath.Join(dir, "mask.png")
	writePNG(t, path, m)
	got := maskOf(t, g, Spec{Occlude: "mask:" + path}, 0, 0)
	if len(got) != 2 || got[0] != 0 || got[1] != 1 {
		t.Fatalf("mask cells %v, want [0 1]", got)
	}
	small := filepath.Join(dir, "small.png")
	writePNG(t, small, image.NewGray(image.Rect(0, 0, 4, 4)))
	if _, err := NewPipeline(g, Spec{Occlude: "mask:" + small}); err == nil || !strings.Contains(err.Error(), "4x4") {
		t.Fatalf("size mismatch: %v", err)
	}
	notPNG := filepath.Join(dir, "x.png")
	os.WriteFile(notPNG, []byte("not a png"), 0o644)
	if _, err := NewPipeline(g, Spec{Occlude: "mask:" + notPNG}); err == nil {
		t.Fatal("corrupt mask accepted")
	}
	if _, err := NewPipeline(g, Spec{Occlude: "mask:" + filepath.Join(dir, "none.png")}); err == nil {
		t.Fatal("missing mask accepted")
	}
}

func writePNG(t *testing.T, path string, img image.Image) {
	t.Helper()
	f, err := os.Create(path)
	if err != nil {
		t.Fatal(err)
	}
	if err := png.Encode(f, img); err != nil {
		t.Fatal(err)
	}
	f.Close()
}

// Fills: black zeros, mean = the frame's per-channel mean, noise in
// [0,1); drop removes exactly the occluded tokens.
func TestFills(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 4})
	_, _, src := tokensOf(t, g, 3)
	var sum [3]float64
	for i, v := range src.Data {
		sum[i%3] += float64(v)
	}
	for _, fill := range []string{"black", "mean", "noise", "drop"} {
		p := mustPipe(t, g, Spec{Occlude: "random:0.5", Fill: fill})
		p.Reset(1)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		if err := p.Apply(0, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
		occ := map[int]bool{}
		for _, c := range rec.Mask {
			occ[c] = true
		}
		for i := 0; i < dst.N; i++ {
			tok, j := dst.Token(i), rec.Perm[i]
			if !occ[j] {
				if !equalF32(tok, src.Token(j)) {
					t.Fatalf("%s: visible token %d changed", fill, j)
				}
				continue
			}
			for k, v := range tok {
				switch fill {
				case "black":
					if v != 0 {
						t.Fatalf("black fill %v", v)
					}
				case "mean":
					want := float32(sum[k%3] / float64(len(src.Data)/3))
					if v != want || rec.Params.Mean[k%3] != want {
						t.Fatalf("mean fill %v, want %v", v, want)
					}
				case "noise":
					if v < 0 || v >= 1 {
						t.Fatalf("noise fill %v", v)
					}
				case "drop":
					t.Fatal("dropped token still present")
				}
			}
		}
		if fill == "drop" && dst.N != g.N()-len(rec.Mask) {
			t.Fatalf("drop left %d tokens", dst.N)
		}
	}
}

// Photometric: v' = clamp(v + (v−0.5)(c−1) + b + shift[c]) computed here
// in float64 from the formula in the Spec doc; Gaussian noise has the
// asked standard deviation (sample checks with wide bounds).
func TestPhotometric(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 4})
	_, _, src := tokensOf(t, g, 3)
	spec := Spec{Brightness: 0.1, Contrast: 1.5, Shift: [3]float64{0.05, -0.2, 0}}
	p := mustPipe(t, g, spec)
	dst := NewTokenSet(p.Capacity(), g.D())
	if err := p.Apply(0, src, dst, nil); err != nil {
		t.Fatal(err)
	}
	for i, v := range src.Data {
		w := float64(v) + (float64(v)-0.5)*0.5 + 0.1 + spec.Shift[i%3]
		w = math.Min(1, math.Max(0, w))
		if math.Abs(float64(dst.Data[i])-w) > 1e-6 {
			t.Fatalf("value %d: %v, want %v", i, dst.Data[i], w)
		}
	}
	// Noise: on a mid-grey frame, the sample sd of v'−v is σ within 5 %.
	grey := image.NewGray(image.Rect(0, 0, 64, 64))
	for i := range grey.Pix {
		grey.Pix[i] = 128
	}
	g2 := mustGrid(t, GridConfig{Width: 64, Height: 64, PatchW: 8, Channels: 1})
	ts := NewTokenSet(g2.N(), g2.D())
	NewTokenizer(g2).Tokenize(grey, ts)
	p2 := mustPipe(t, g2, Spec{PixelNoise: 0.05})
	out := NewTokenSet(p2.Capacity(), g2.D())
	p2.Apply(0, ts, out, nil)
	var s1, s2 float64
	for i, v := range out.Data {
		d := float64(v - ts.Data[i])
		s1 += d
		s2 += d * d
	}
	n := float64(len(out.Data))
	mean, sd := s1/n, math.Sqrt(s2/n-(s1/n)*(s1/n))
	if math.Abs(mean) > 0.005 || math.Abs(sd-0.05) > 0.0025 {
		t.Fatalf("pixel noise mean %v sd %v, want 0 and 0.05", mean, sd)
	}
}

// detLog agrees with math.Log to within 1 ulp-ish (relative 1e-15).
func TestDetLog(t *testing.T) {
	r := NewRand(1)
	for i := 0; i < 100000; i++ {
		x := r.Float64()
		if x == 0 {
			continue
		}
		if i%2 == 0 {
			x = math.Ldexp(x, int(r.IntN(60))-30)
		}
		a, b := detLog(x), math.Log(x)
		if math.Abs(a-b) > 1e-15*math.Max(1, math.Abs(b)) {
			t.Fatalf("detLog(%v) = %v, math.Log %v", x, a, b)
		}
	}
}

// The polar method's output is standard normal: Kolmogorov–Smirnov
// distance to gonum's distuv.UnitNormal CDF below the 0.1 % critical
// value 1.95/sqrt(n) (asymptotic Kolmogorov distribution, from memory).
func TestNormalPair(t *testing.T) {
	r := NewRand(2)
	const n = 20000
	xs := make([]float64, 0, n)
	for len(xs) < n {
		a, b := normalPair(r)
		xs = append(xs, a, b)
	}
	sortFloats(xs)
	d := 0.0
	for i, x := range xs {
		c := distuv.UnitNormal.CDF(x)
		d = math.Max(d, math.Max(math.Abs(c-float64(i)/n), math.Abs(c-float64(i+1)/n)))
	}
	if d > 1.95/math.Sqrt(n) {
		t.Fatalf("KS distance %v", d)
	}
}

func sortFloats(x []float64) {
	for i := 1; i < len(x); i++ {
		v, j := x[i], i-1
		for j >= 0 && x[j] > v {
			x[j+1] = x[j]
			j--
		}
		x[j+1] = v
	}
}

// Noise tokens and duplicates: counts, positions and records.
func TestExtraTokens(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 4})
	_, _, src := tokensOf(t, g, 3)
	p := mustPipe(t, g, Spec{Scramble: "full", NoiseTokens: 3, Duplicates: 4})
	p.Reset(5)
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(0, src, dst, &rec); err != nil {
		t.Fatal(err)
	}
	if dst.N != g.N()+7 || rec.Real != g.N() || rec.Noise != 3 || rec.Dups != 4 {
		t.Fatalf("N %d record %+v", dst.N, rec)
	}
	for i := rec.Real; i < rec.Real+3; i++ {
		if dst.Pos[i] != NoCell || rec.Perm[i] != -1 {
			t.Fatal("noise token has a cell")
		}
	}
	for i := rec.Real + 3; i < dst.N; i++ {
		j := rec.Perm[i]
		if !equalF32(dst.Token(i), src.Token(j)) || dst.Pos[i] == NoCell {
			t.Fatal("duplicate does not copy its source")
		}
	}
}

// Rotation needs square patches; bad specs give one-line errors.
func TestSpecErrors(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 16, Height: 16, PatchW: 4, PatchH: 2})
	if _, err := NewPipeline(g, Spec{Rotate: true}); err == nil {
		t.Fatal("rotation of 4x2 patches accepted")
	}
	if _, err := NewPipeline(g, Spec{Flip: true}); err != nil {
		t.Fatal(err)
	}
	for _, s := range []Spec{
		{Scramble: "shuffle"}, {Scramble: "partial:1.5"}, {Scramble: "partial:-0.1"}, {Scramble: "partial"},
		{Scramble: "local:-1"}, {Scramble: "local:x"}, {Scramble: "full:2"}, {Every: -1},
		{Occlude: "random:2"}, {Occlude: "random:NaN"}, {Occlude: "random:1e-3"}, {Occlude: "block"},
		{Occlude: "bands:0.2:d"}, {Occlude: "sweep:0.2:0"}, {Occlude: "mask:"}, {Occlude: "blob:0.1"},
		{Fill: "white"}, {NoiseTokens: -1}, {Duplicates: 1 << 20}, {Brightness: 2}, {Contrast: -1},
		{Shift: [3]float64{0, math.NaN(), 0}}, {PixelNoise: 1.5},
	} {
		err := s.Check()
		if err == nil {
			t.Errorf("%+v accepted", s)
			continue
		}
		if strings.Contains(err.Error(), "\n") {
			t.Errorf("error is not one line: %q", err)
		}
	}
}

func TestSpecStringRoundTrip(t *testing.T) {
	for _, s := range []Spec{
		{},
		{Scramble: "full", Every: 10, Rotate: true, Flip: true},
		{Scramble: "local:2", Occlude: "sweep:0.3:2", Fill: "noise"},
		{Occlude: "mask:my mask \"1\".png", Fill: "drop", NoiseTokens: 4, Duplicates: 2},
		{Brightness: -0.25, Contrast: 1.2, Shift: [3]float64{0.1, 0, -0.1}, PixelNoise: 0.02},
	} {
		line := s.String()
		back, err := ParseSpec(line)
		if err != nil {
			t.Fatalf("%q: %v", line, err)
		}
		if back != s {
			t.Fatalf("%q read back as %+v, want %+v", line, back, s)
		}
	}
	if s, err := ParseSpec("scramble=full rotate"); err != nil || !s.Rotate {
		t.Fatal("bare rotate not read")
	}
	for _, bad := range []string{"scramble", "every=x", "colour=red", "scramble=full scramble=none", "\"unclosed", "shift=1,2"} {
		if _, err := ParseSpec(bad); err == nil {
			t.Errorf("ParseSpec(%q) accepted", bad)
		}
	}
}

// The result of a step depends on the seed and t only, not on the order
// of calls; different seeds differ.
func TestOrderIndependence(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 24, Height: 24, PatchW: 4})
	_, _, src := tokensOf(t, g, 3)
	spec := Spec{Scramble: "full", Every: 3, Rotate: true, Occlude: "random:0.3", Fill: "noise", NoiseTokens: 2, Duplicates: 2, PixelNoise: 0.1}
	run := func(order []int, seed uint64) map[int]string {
		p := mustPipe(t, g, spec)
		p.Reset(seed)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		out := map[int]string{}
		for _, step := range order {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			out[step] = digest(dst, &rec)
		}
		return out
	}
	a := run([]int{0, 1, 2, 3, 4, 5, 6, 7}, 9)
	b := run([]int{7, 3, 5, 0, 6, 1, 4, 2}, 9)
	c := run([]int{0, 1, 2, 3, 4, 5, 6, 7}, 10)
	for s := range a {
		if a[s] != b[s] {
			t.Fatalf("step %d depends on call order", s)
		}
		if a[s] == c[s] {
			t.Fatalf("step %d same for seeds 9 and 10", s)
		}
	}
}

// digest hashes a token set's bytes and its record.
func digest(ts *TokenSet, rec *FrameRecord) string {
	h := sha256.New()
	var b [4]byte
	for _, v := range ts.Data[:ts.N*ts.D] {
		binary.LittleEndian.PutUint32(b[:], math.Float32bits(v))
		h.Write(b[:])
	}
	for _, p := range ts.Pos[:ts.N] {
		binary.LittleEndian.PutUint16(b[:], uint16(p.Row))
		binary.LittleEndian.PutUint16(b[2:], uint16(p.Col))
		h.Write(b[:])
	}
	j, _ := json.Marshal(rec)
	h.Write(j)
	return hex.EncodeToString(h.Sum(nil))
}

// Determinism pin: the bytes of a run with every transform on, for seed
// 2026. This is a regression pin of our own output (not an outside
// check): it fails when a machine, Go version or code change alters the
// random streams or the arithmetic. Regenerate only for an intended
// change of the streams, and say so in the commit.
func TestDeterminismPin(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 24, Height: 20, PatchW: 4})
	_, _, src := tokensOf(t, g, 3)
	spec := Spec{Scramble: "full", Every: 2, Rotate: true, Flip: true, Occlude: "random:0.25", Fill: "noise",
		NoiseTokens: 2, Duplicates: 3, Brightness: 0.05, Contrast: 1.1, Shift: [3]float64{0.01, 0.02, -0.03}, PixelNoise: 0.03}
	p := mustPipe(t, g, spec)
	p.Reset(2026)
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	h := sha256.New()
	for step := 0; step < 6; step++ {
		if err := p.Apply(step, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
		h.Write([]byte(digest(dst, &rec)))
	}
	got := hex.EncodeToString(h.Sum(nil))
	const want = "aef4fec00b70c7f423b8ae569580dc2bf16ade37ee599462e0c4ff1d11fd958f"
	if got != want {
		t.Fatalf("determinism pin changed: %s", got)
	}
}

func TestApplyErrorsAndAllocs(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 96, Height: 96, PatchW: 8})
	_, _, src := tokensOf(t, g, 3)
	p := mustPipe(t, g, Spec{Scramble: "full", Every: 1, Rotate: true, Occlude: "random:0.25", Fill: "drop", NoiseTokens: 2, Duplicates: 2, PixelNoise: 0.01})
	dst := NewTokenSet(p.Capacity(), g.D())
	var rec FrameRecord
	if err := p.Apply(0, src, NewTokenSet(g.N(), g.D()), &rec); err == nil {
		t.Fatal("small destination accepted")
	}
	if err := p.Apply(-1, src, dst, &rec); err == nil {
		t.Fatal("negative step accepted")
	}
	if err := p.Apply(0, src, src, &rec); err == nil {
		t.Fatal("in-place apply accepted")
	}
	step := 0
	n := testing.AllocsPerRun(50, func() {
		step++
		if err := p.Apply(step, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
	})
	if n != 0 {
		t.Fatalf("Apply allocates %v times a step", n)
	}
	for _, s := range []Spec{
		{Scramble: "local:2", Every: 1, Occlude: "sweep:0.2", Fill: "mean", Flip: true},
		{Scramble: "partial:0.3", Every: 1, Occlude: "bands:0.3", Fill: "noise", Brightness: 0.1},
		{Occlude: "block:0.4", Duplicates: 3},
	} {
		p := mustPipe(t, g, s)
		dst := NewTokenSet(p.Capacity(), g.D())
		step := 0
		if n := testing.AllocsPerRun(20, func() {
			step++
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
		}); n != 0 {
			t.Errorf("%v: Apply allocates %v times a step", s, n)
		}
	}
}

// Schedule: Every 0 keeps one permutation for the whole sequence; Every T
// changes it exactly at multiples of T (with 24 cells a repeat by chance
// is negligible).
func TestScrambleSchedule(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 24, Height: 16, PatchW: 4, Channels: 1})
	_, _, src := tokensOf(t, g, 1)
	for _, every := range []int{0, 1, 3} {
		p := mustPipe(t, g, Spec{Scramble: "full", Every: every, Rotate: true})
		p.Reset(4)
		dst := NewTokenSet(p.Capacity(), g.D())
		var rec FrameRecord
		prev := ""
		for step := 0; step < 12; step++ {
			if err := p.Apply(step, src, dst, &rec); err != nil {
				t.Fatal(err)
			}
			cur := fmt.Sprint(rec.Perm, rec.Orient)
			changed := step > 0 && cur != prev
			want := every > 0 && step > 0 && step%every == 0
			if changed != want {
				t.Fatalf("every %d step %d: changed %v, want %v", every, step, changed, want)
			}
			if wantE := map[bool]int{true: 0, false: step / max(every, 1)}[every == 0]; rec.Epoch != wantE {
				t.Fatalf("every %d step %d: epoch %d, want %d", every, step, rec.Epoch, wantE)
			}
			prev = cur
		}
	}
}

// Rotations: a turned 2×2 token holds its source's pixels in the turned
// order (clockwise quarter turn: top-left ← bottom-left).
func TestRotationLayout(t *testing.T) {
	g := mustGrid(t, GridConfig{Width: 2, Height: 2, PatchW: 2, Channels: 1})
	src := NewTokenSet(1, 4)
	src.N, src.Pos[0] = 1, Pos{}
	copy(src.Data, []float32{0.1, 0.2, 0.3, 0.4}) // a b / c d
	want := map[int][]float32{
		0: {0.1, 0.2, 0.3, 0.4},
		1: {0.3, 0.1, 0.4, 0.2}, // c a / d b
		2: {0.4, 0.3, 0.2, 0.1},
		3: {0.2, 0.4, 0.1, 0.3},
		4: {0.2, 0.1, 0.4, 0.3}, // mirrored: b a / d c
	}
	p := mustPipe(t, g, Spec{Rotate: true, Flip: true, Every: 1})
	p.Reset(1)
	dst := NewTokenSet(p.Capacity(), 4)
	var rec FrameRecord
	seen := map[int]bool{}
	for step := 0; step < 200; step++ {
		if err := p.Apply(step, src, dst, &rec); err != nil {
			t.Fatal(err)
		}
		o := rec.Orient[0]
		seen[o] = true
		if w, ok := want[o]; ok && !equalF32(dst.Data[:4], w) {
			t.Fatalf("orientation %d gave %v, want %v", o, dst.Data[:4], w)
		}
	}
	if len(seen) != 8 {
		t.Fatalf("saw orientations %v, want all 8", seen)
	}
}

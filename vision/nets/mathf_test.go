package nets

import (
	"fmt"
	"math"
	"testing"
)

// expf and tanhf against the standard library's float64 functions
// (correctly rounded to within 1 ulp in float64): relative error of expf
// within 4 float32 ulps (4·2^-24 ≈ 2.4e-7) over the normal range, and
// absolute error of tanhf within 3e-7.
func TestExpTanhAccuracy(t *testing.T) {
	worstE, worstT := 0.0, 0.0
	for x := -87.0; x <= 88.5; x += 0.00731 {
		got := float64(expf(float32(x)))
		want := math.Exp(float64(float32(x)))
		if e := math.Abs(got-want) / want; e > worstE {
			worstE = e
		}
	}
	for x := -12.0; x <= 12; x += 0.000917 {
		got := float64(tanhf(float32(x)))
		want := math.Tanh(float64(float32(x)))
		if e := math.Abs(got - want); e > worstT {
			worstT = e
		}
	}
	if worstE > 2.4e-7 {
		t.Errorf("expf: worst relative error %.3g, want ≤ 2.4e-7", worstE)
	}
	if worstT > 3e-7 {
		t.Errorf("tanhf: worst absolute error %.3g, want ≤ 3e-7", worstT)
	}
	for _, c := range []struct{ x, want float32 }{{-100, 0}, {0, 1}, {float32(math.Inf(-1)), 0}} {
		if got := expf(c.x); got != c.want {
			t.Errorf("expf(%v) = %v, want %v", c.x, got, c.want)
		}
	}
	if !math.IsInf(float64(expf(100)), 1) {
		t.Errorf("expf(100) = %v, want +Inf", expf(100))
	}
	if tanhf(30) != 1 || tanhf(-30) != -1 || tanhf(0) != 0 {
		t.Errorf("tanhf at ±30, 0: %v %v %v", tanhf(30), tanhf(-30), tanhf(0))
	}
}

// Softmax of logits ±1e4 stays finite and correct: the exact values follow
// from the definition softmax(z)_i = e^{z_i}/Σ e^{z_j} (e^{-2e4} is 0 in
// any floating format).
func TestSoftmaxExtremeLogits(t *testing.T) {
	cases := []struct{ in, want []float32 }{
		{[]float32{1e4, -1e4, 0, 1e4}, []float32{0.5, 0, 0, 0.5}},
		{[]float32{-1e4, -1e4}, []float32{0.5, 0.5}},
		{[]float32{1e4}, []float32{1}},
		{[]float32{-1e4, -1e4 + float32(math.Ln2)}, []float32{1.0 / 3, 2.0 / 3}},
	}
	for _, c := range cases {
		row := append([]float32(nil), c.in...)
		softmaxRow(row)
		for i := range row {
			if math.IsNaN(float64(row[i])) || math.IsInf(float64(row[i]), 0) || math.Abs(float64(row[i]-c.want[i])) > 1e-3 {
				t.Errorf("softmax(%v) = %v, want %v", c.in, row, c.want)
				break
			}
		}
	}
	// Random rows against a float64 softmax.
	rng := testRand(5)
	for trial := 0; trial < 50; trial++ {
		row := randSlice(rng, 37, 30)
		ref := make([]float64, len(row))
		mx := math.Inf(-1)
		for _, v := range row {
			mx = math.Max(mx, float64(v))
		}
		var s float64
		for i, v := range row {
			ref[i] = math.Exp(float64(v) - mx)
			s += ref[i]
		}
		softmaxRow(row)
		for i := range row {
			if math.Abs(float64(row[i])-ref[i]/s) > 1e-6 {
				t.Fatalf("softmax entry %d = %v, float64 reference %v", i, row[i], ref[i]/s)
			}
		}
	}
}

// PositionalEncoding against the formula of Vaswani et al. 2017, §3.5,
// at positions worked out by hand: PE(p, 2i) = sin(p/10000^(2i/d)),
// PE(p, 2i+1) = cos(p/10000^(2i/d)). Sine and cosine values of 0.5, 1
// and 3 radians from tables (from memory, 10 digits).
func TestPositionalEncodingValues(t *testing.T) {
	pe := PositionalEncoding(60, 4) // d = 4: the second pair uses p/100
	at := func(p, j int) float64 { return float64(pe[p*4+j]) }
	checks := []struct {
		p, j int
		want float64
	}{
		{0, 0, 0}, {0, 1, 1}, {0, 2, 0}, {0, 3, 1},
		{1, 0, 0.8414709848}, {1, 1, 0.5403023059}, // sin 1, cos 1
		{3, 0, 0.1411200081}, {3, 1, -0.9899924966}, // sin 3, cos 3
		{50, 2, 0.4794255386}, {50, 3, 0.8775825619}, // 50/100: sin 0.5, cos 0.5
		{1, 2, 0.0099998333}, // sin 0.01 ≈ 0.01 − 0.01³/6
	}
	for _, c := range checks {
		if got := at(c.p, c.j); math.Abs(got-c.want) > 1e-7 {
			t.Errorf("PE(%d,%d) = %.10f, want %.10f", c.p, c.j, got, c.want)
		}
	}
	// d = 16: pair i = 4 uses 10000^(8/16) = 100, so PE(50, 8) = sin 0.5.
	pe16 := PositionalEncoding(51, 16)
	if got := float64(pe16[50*16+8]); math.Abs(got-0.4794255386) > 1e-7 {
		t.Errorf("PE(50,8) at d=16 = %.10f, want sin 0.5 = 0.4794255386", got)
	}
}

// The vector exp of the softmax (assembly where available) against the
// scalar expf, on rows of every length remainder.
func TestExpSubRowMatchesScalar(t *testing.T) {
	rng := testRand(8)
	for n := 0; n < 40; n++ {
		row := randSlice(rng, n, 120)
		ref := append([]float32(nil), row...)
		var m float32 = 3
		s := expSubRow(row, m)
		sr := expSubRowGo(ref, m)
		for i := range row {
			if d := math.Abs(float64(row[i] - ref[i])); d > 2e-7*math.Max(1e-30, float64(ref[i])) {
				t.Fatalf("n=%d: e^(%v) = %v, scalar %v", n, ref[i], row[i], ref[i])
			}
		}
		if math.Abs(float64(s-sr)) > 1e-6*math.Max(1, float64(sr)) {
			t.Fatalf("n=%d: sum %v, scalar %v", n, s, sr)
		}
	}
}

// tanhRow gives tanhf's bits for every value, on the vector path and the
// tail alike: a sweep through the float32 bit patterns (every sign,
// exponent and many mantissas, so subnormals, ±Inf and NaNs included),
// values either side of the branch points 0.625 and 9.01, and rows of
// every length and offset up to 40. tanhf itself is checked against
// math.Tanh in TestExpTanhAccuracy.
func TestTanhRowMatchesTanhf(t *testing.T) {
	var src []float32
	for b := uint64(0); b < 1<<32; b += 997 {
		src = append(src, math.Float32frombits(uint32(b)))
	}
	for _, edge := range []float32{0.625, 9.01, 0, 1} {
		v := edge
		for i := 0; i < 20; i++ {
			src = append(src, v, -v)
			v = math.Nextafter32(v, 0)
		}
		v = edge
		for i := 0; i < 20; i++ {
			src = append(src, v, -v)
			v = math.Nextafter32(v, 100)
		}
	}
	src = append(src, float32(math.Copysign(0, -1)), float32(math.Inf(1)), float32(math.Inf(-1)), float32(math.NaN()))
	dst := make([]float32, len(src))
	check := func(what string, dst, src []float32) {
		t.Helper()
		for i, v := range src {
			if got, want := math.Float32bits(dst[i]), math.Float32bits(tanhf(v)); got != want {
				t.Fatalf("%s: tanhRow(%g = %#08x) = %#08x, tanhf %#08x", what, v, math.Float32bits(v), got, want)
			}
		}
	}
	tanhRow(dst, src)
	check("sweep", dst, src)
	for off := 0; off < 8; off++ {
		for n := 0; n <= 40; n++ {
			d := make([]float32, n)
			tanhRow(d, src[len(src)-200+off:len(src)-200+off+n])
			check(fmt.Sprintf("offset %d length %d", off, n), d, src[len(src)-200+off:len(src)-200+off+n])
		}
	}
}

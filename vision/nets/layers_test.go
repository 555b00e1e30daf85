package nets

import (
	"math"
	"math/rand/v2"
	"testing"

	"tilebench/patch"
)

// Gradient checks by central finite differences, (L(θ+h) − L(θ−h))/2h,
// whose truncation error is O(h²) (common practice). The layers compute
// in float32, so the loss carries a relative rounding error of about
// 6e-8 per operation; with h = 1e-2 that rounding contributes about
// 1e-5·|L| to the difference quotient and the truncation about
// 1e-4·|L”'|. The tolerance |analytic − numeric| ≤ 2e-3 + 1e-2·|numeric|
// sits well above both and far below the size of any real error (a
// missing term or a wrong sign moves a gradient by O(1)).
const (
	fdStep = 1e-2
	fdAbs  = 2e-3
	fdRel  = 1e-2
)

// fdCheck compares analytic gradients with central differences of loss
// with respect to every value of theta.
func fdCheck(t *testing.T, name string, theta, analytic []float32, loss func() float64) {
	t.Helper()
	bad := 0
	for i := range theta {
		v := theta[i]
		theta[i] = v + fdStep
		lp := loss()
		theta[i] = v - fdStep
		lm := loss()
		theta[i] = v
		num := (lp - lm) / (2 * fdStep)
		a := float64(analytic[i])
		if math.Abs(a-num) > fdAbs+fdRel*math.Abs(num) {
			if bad < 5 {
				t.Errorf("%s[%d]: analytic %.6g, central difference %.6g", name, i, a, num)
			}
			bad++
		}
	}
	if bad > 0 {
		t.Errorf("%s: %d of %d gradients wrong", name, bad, len(theta))
	}
}

func randSlice(rng *rand.Rand, n int, scale float32) []float32 {
	s := make([]float32, n)
	for i := range s {
		s[i] = (2*rng.Float32() - 1) * scale
	}
	return s
}

// dotLoss is Σ r_i·y_i in float64: its gradient with respect to y is r.
func dotLoss(r, y []float32) float64 {
	var s float64
	for i, v := range y {
		s += float64(r[i]) * float64(v)
	}
	return s
}

func TestLinearGradients(t *testing.T) {
	rng := patch.NewRand(1)
	const rows, in, out, ldx = 5, 7, 3, 9
	params := randSlice(rng, in*out+out, 1)
	grads := make([]float32, len(params))
	l := &linear{in: in, out: out, woff: 0, boff: in * out, needDX: true}
	l.bind(params, grads)
	x := randSlice(rng, rows*ldx, 1)
	r := randSlice(rng, rows*out, 1)
	loss := func() float64 { return dotLoss(r, l.forward(x, ldx, rows)) }
	loss()
	dx := append([]float32(nil), l.backward(r)...)
	fdCheck(t, "linear params", params, grads, loss)
	// dx is dense rows×in; compare against differences of the strided input.
	xd := make([]float32, rows*in)
	for i := 0; i < rows; i++ {
		copy(xd[i*in:(i+1)*in], x[i*ldx:i*ldx+in])
	}
	lossX := func() float64 {
		for i := 0; i < rows; i++ {
			copy(x[i*ldx:i*ldx+in], xd[i*in:(i+1)*in])
		}
		return loss()
	}
	fdCheck(t, "linear input", xd, dx, lossX)
}

func TestTanhGradient(t *testing.T) {
	rng := patch.NewRand(2)
	x := randSlice(rng, 20, 3)
	r := randSlice(rng, 20, 1)
	var l tanhLayer
	loss := func() float64 { return dotLoss(r, l.forward(x)) }
	loss()
	fdCheck(t, "tanh input", x, append([]float32(nil), l.backward(r)...), loss)
}

func TestAttentionGradients(t *testing.T) {
	rng := patch.NewRand(3)
	const m, d, dv, n, ldv = 3, 4, 5, 6, 7
	a := &attention{m: m, d: d, dv: dv, scale: 1 / sqrtf(d), needDV: true}
	q := randSlice(rng, m*d, 1)
	k := randSlice(rng, n*d, 1)
	v := randSlice(rng, n*ldv, 1)
	r := randSlice(rng, m*dv, 1)
	loss := func() float64 { return dotLoss(r, a.forward(q, k, d, v, ldv, n)) }
	loss()
	dq, dk, dvv := a.backward(r)
	dq = append([]float32(nil), dq...)
	dk = append([]float32(nil), dk...)
	dvv = append([]float32(nil), dvv...)
	fdCheck(t, "attention Q", q, dq, loss)
	fdCheck(t, "attention K", k, dk, loss)
	vd := make([]float32, n*dv)
	for i := 0; i < n; i++ {
		copy(vd[i*dv:(i+1)*dv], v[i*ldv:i*ldv+dv])
	}
	lossV := func() float64 {
		for i := 0; i < n; i++ {
			copy(v[i*ldv:i*ldv+dv], vd[i*dv:(i+1)*dv])
		}
		return loss()
	}
	fdCheck(t, "attention V", vd, dvv, lossV)
}

func TestAttentionNoTokens(t *testing.T) {
	a := &attention{m: 2, d: 3, dv: 4, scale: 1, needDV: true}
	o := a.forward(make([]float32, 6), nil, 3, nil, 4, 0)
	for _, v := range o {
		if v != 0 {
			t.Fatalf("attention over no tokens gave %v, want zeros", o)
		}
	}
	a.backward(make([]float32, 8))
}

func TestMeanPoolGradient(t *testing.T) {
	rng := patch.NewRand(4)
	const n, d = 6, 5
	x := randSlice(rng, n*d, 1)
	r := randSlice(rng, d, 1)
	p := &meanPool{d: d}
	loss := func() float64 { return dotLoss(r, p.forward(x, d, n)) }
	loss()
	fdCheck(t, "meanpool input", x, append([]float32(nil), p.backward(r)...), loss)
	// The mean itself, against the definition.
	y := p.forward(x, d, n)
	for j := 0; j < d; j++ {
		var s float64
		for i := 0; i < n; i++ {
			s += float64(x[i*d+j])
		}
		if math.Abs(s/n-float64(y[j])) > 1e-6 {
			t.Fatalf("mean[%d] = %v, want %v", j, y[j], s/n)
		}
	}
}

// Attention with logits of ±1e4 stays finite and gives the softmax of
// the definition (computed here in float64 from the same float32 logits),
// forward and backward.
func TestAttentionExtremeLogits(t *testing.T) {
	a := &attention{m: 1, d: 1, dv: 2, scale: 1, needDV: true}
	q := []float32{100}
	k := []float32{100, -100, 99.99}
	v := []float32{1, 0, 0, 1, 2, 3}
	o := a.forward(q, k, 1, v, 2, 3)
	logits := make([]float64, 3)
	for i := range k {
		logits[i] = float64(q[0] * k[i])
	}
	w := make([]float64, 3)
	var s float64
	for i, z := range logits {
		w[i] = math.Exp(z - logits[0])
		s += w[i]
	}
	want := []float64{(w[0]*1 + w[2]*2) / s, (w[2] * 3) / s}
	for j := range want {
		if math.IsNaN(float64(o[j])) || math.Abs(float64(o[j])-want[j]) > 1e-5 {
			t.Fatalf("attention output %v, want %v", o, want)
		}
	}
	dq, dk, dv := a.backward([]float32{1, 1})
	for _, g := range [][]float32{dq, dk, dv} {
		for _, x := range g {
			if math.IsNaN(float64(x)) || math.IsInf(float64(x), 0) {
				t.Fatalf("non-finite gradient %v %v %v", dq, dk, dv)
			}
		}
	}
	// dV = Pᵀ·dO: row i is P_i·(1, 1).
	if math.Abs(float64(dv[0])-w[0]/s) > 1e-5 || dv[2] != 0 || dv[3] != 0 || math.Abs(float64(dv[5])-w[2]/s) > 1e-5 {
		t.Errorf("dV = %v, want rows weighted %v", dv, []float64{w[0] / s, 0, w[2] / s})
	}
}

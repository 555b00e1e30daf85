package train

import (
	"context"
	"math"
	"reflect"
	"testing"
)

// sphere and rosenbrock are the standard test functions (minimised; the
// optimisers here maximise, so fitness is their negative). Both have
// minimum 0: sphere at 0, Rosenbrock at (1, …, 1) (Rosenbrock 1960;
// the n-dimensional chained form as in Hansen's tutorial, from memory).
func sphere(x []float32) float64 {
	s := 0.0
	for _, v := range x {
		s += float64(v) * float64(v)
	}
	return s
}

func rosenbrock(x []float32) float64 {
	s := 0.0
	for i := 0; i+1 < len(x); i++ {
		a, b := float64(x[i]), float64(x[i+1])
		s += 100*(b-a*a)*(b-a*a) + (1-a)*(1-a)
	}
	return s
}

func neg(f func([]float32) float64) Fitness {
	return func(_, _ int, x []float32) (float64, error) { return -f(x), nil }
}

// TestCMAESettingsMatchHansen reads the fixed parameters gonum's
// CmaEsChol derives for the settings RunCMAES passes and compares them
// with Hansen's tutorial (arXiv:1604.00772, Table 1) for n = 10:
// λ = 4+⌊3 ln n⌋ = 10, μ = ⌊λ/2⌋ = 5, w'_i = ln((λ+1)/2) − ln i
// normalised to sum 1, μ_eff = 1/Σw_i² ≈ 3.167, c_σ = (μ_eff+2)/(n+μ_eff+5),
// c_c = (4+μ_eff/n)/(n+4+2μ_eff/n), c_1 = 2/((n+1.3)²+μ_eff),
// d_σ = 1+2·max(0, √((μ_eff−1)/(n+1))−1)+c_σ.
func TestCMAESettingsMatchHansen(t *testing.T) {
	m := newCMA(CMAConfig{}.withDefaults(), 10)
	m.Init(10, 2)
	v := reflect.ValueOf(m).Elem()
	pop := int(v.FieldByName("pop").Int())
	w := v.FieldByName("weights")
	if pop != 10 || w.Len() != 5 {
		t.Fatalf("λ = %d, μ = %d; Hansen Table 1 gives 10 and 5 for n = 10", pop, w.Len())
	}
	// Weights from Table 1's formula, computed here independently.
	var want [5]float64
	sum := 0.0
	for i := range want {
		want[i] = math.Log(11.0/2) - math.Log(float64(i+1))
		sum += want[i]
	}
	sq := 0.0
	for i := range want {
		want[i] /= sum
		got := w.Index(i).Float()
		if math.Abs(got-want[i]) > 1e-12 {
			t.Fatalf("w_%d = %v, Table 1 gives %v", i+1, got, want[i])
		}
		sq += got * got
	}
	muEff := 1 / sq
	if math.Abs(muEff-3.167) > 5e-4 {
		t.Fatalf("μ_eff from the weights = %v, Hansen ≈ 3.167", muEff)
	}
	if got := v.FieldByName("muEff").Float(); math.Abs(got-muEff) > 1e-12 {
		t.Fatalf("gonum μ_eff %v, from its weights %v", got, muEff)
	}
	n := 10.0
	for name, wantV := range map[string]float64{
		"cs": (muEff + 2) / (n + muEff + 5),
		"cc": (4 + muEff/n) / (n + 4 + 2*muEff/n),
		"c1": 2 / ((n+1.3)*(n+1.3) + muEff),
		"ds": 1 + 2*math.Max(0, math.Sqrt((muEff-1)/(n+1))-1) + (muEff+2)/(n+muEff+5),
	} {
		if got := v.FieldByName(name).Float(); math.Abs(got-wantV) > 1e-12 {
			t.Errorf("%s = %v, Table 1 gives %v", name, got, wantV)
		}
	}
}

// Budgets and tolerances stated for the 10-dimensional problems (start
// x0 = 0 for Rosenbrock, x0 = (1, …, 1) for the sphere).
const (
	cmaSphereEvals = 20_000  // CMA-ES (gonum CmaEsChol, σ⁽⁰⁾ = 0.1): sphere to f < 1e-3
	cmaRosenEvals  = 50_000  // CMA-ES: Rosenbrock to f < 1e-2
	esSphereEvals  = 20_000  // ES: sphere to f < 1e-3
	esRosenEvals   = 200_000 // ES: Rosenbrock to f < 1e-1
)

func TestCMAESSolvesSphereAndRosenbrock(t *testing.T) {
	ones := make([]float32, 10)
	for i := range ones {
		ones[i] = 1
	}
	cases := []struct {
		name  string
		f     func([]float32) float64
		x0    []float32
		evals int
		tol   float64
	}{
		{"sphere", sphere, ones, cmaSphereEvals, 1e-3},
		{"rosenbrock", rosenbrock, make([]float32, 10), cmaRosenEvals, 1e-2},
	}
	for _, c := range cases {
		res, err := RunCMAES(context.Background(), CMAConfig{Seed: 3, MaxEvals: c.evals, Workers: 2}, c.x0, neg(c.f), nil, nil)
		if err != nil {
			t.Fatal(err)
		}
		if f := c.f(res.Best); f > c.tol {
			t.Errorf("%s: f = %g after %d evaluations, want < %g", c.name, f, res.Evals, c.tol)
		}
		if res.Evals > c.evals+10 {
			t.Errorf("%s: %d evaluations, budget %d", c.name, res.Evals, c.evals)
		}
		t.Logf("%s: f = %.3g after %d evaluations (%d generations)", c.name, c.f(res.Best), res.Evals, res.Gens)
	}
}

// TestCMAESReplayContinuesExactly: a run stopped after some generations
// and resumed from its history ends where an uninterrupted run ends.
func TestCMAESReplayContinuesExactly(t *testing.T) {
	x0 := make([]float32, 6)
	cfg := CMAConfig{Sigma: 0.3, Seed: 9, Workers: 2, MaxEvals: 400}
	full, err := RunCMAES(context.Background(), cfg, x0, neg(rosenbrock), nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	calls := 0
	counting := func(w, g int, x []float32) (float64, error) { calls++; return -rosenbrock(x), nil }
	cfg.MaxEvals = 160
	cfg.Workers = 1
	part, err := RunCMAES(context.Background(), cfg, x0, counting, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	calls = 0
	cfg.MaxEvals = 400
	rest, err := RunCMAES(context.Background(), cfg, x0, counting, part.History, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !reflect.DeepEqual(rest.Best, full.Best) || rest.BestF != full.BestF {
		t.Fatalf("resumed best %v (%v), uninterrupted %v (%v)", rest.Best, rest.BestF, full.Best, full.BestF)
	}
	if calls != rest.Evals-part.Evals {
		t.Fatalf("resumed run called the fitness %d times, want %d (the rest replayed)", calls, rest.Evals-part.Evals)
	}
}

func TestCMAESRejectsBadConfig(t *testing.T) {
	for _, c := range []CMAConfig{{Population: 1}, {Sigma: -1}, {Workers: -2}, {MaxParams: 3}} {
		if _, err := RunCMAES(context.Background(), c, make([]float32, 4), neg(sphere), nil, nil); err == nil {
			t.Errorf("%+v accepted", c)
		}
	}
}

func runES(t *testing.T, cfg ESConfig, x0 []float32, f Fitness, evals int) *ES {
	t.Helper()
	es, err := NewES(cfg, x0)
	if err != nil {
		t.Fatal(err)
	}
	for es.Evals < evals {
		if _, err := es.Step(context.Background(), f); err != nil {
			t.Fatal(err)
		}
	}
	return es
}

func TestESSolvesSphereAndRosenbrock(t *testing.T) {
	ones := make([]float32, 10)
	for i := range ones {
		ones[i] = 1
	}
	es := runES(t, ESConfig{Sigma: 0.01, LR: 0.01, Seed: 1}, ones, neg(sphere), esSphereEvals)
	if f := sphere(es.Theta); f > 1e-3 {
		t.Errorf("sphere: f = %g after %d evaluations, want < 1e-3", f, es.Evals)
	} else {
		t.Logf("sphere: f = %.3g after %d evaluations", f, es.Evals)
	}
	es = runES(t, ESConfig{Sigma: 0.01, LR: 0.005, Seed: 1}, make([]float32, 10), neg(rosenbrock), esRosenEvals)
	if f := rosenbrock(es.Theta); f > 1e-1 {
		t.Errorf("rosenbrock: f = %g after %d evaluations, want < 1e-1", f, es.Evals)
	} else {
		t.Logf("rosenbrock: f = %.3g after %d evaluations", f, es.Evals)
	}
}

// TestESDeterministicAcrossWorkers: the same seed gives the same bytes
// with 1 and 3 workers.
func TestESDeterministicAcrossWorkers(t *testing.T) {
	x0 := make([]float32, 7)
	a := runES(t, ESConfig{Seed: 5, Workers: 1, WeightDecay: 0.005}, x0, neg(rosenbrock), 320)
	b := runES(t, ESConfig{Seed: 5, Workers: 3, WeightDecay: 0.005}, x0, neg(rosenbrock), 320)
	if !reflect.DeepEqual(a.Theta, b.Theta) {
		t.Fatalf("1 worker %v, 3 workers %v", a.Theta, b.Theta)
	}
	c := runES(t, ESConfig{Seed: 6, Workers: 1, WeightDecay: 0.005}, x0, neg(rosenbrock), 320)
	if reflect.DeepEqual(a.Theta, c.Theta) {
		t.Fatal("a different seed gave the same result")
	}
}

// TestESGradientEstimate: on a linear fitness f(θ) = c·θ the ES gradient
// points along c (Salimans et al. 2017, eq. 1: the smoothed gradient of a
// linear function is its gradient), and Adam's first step has size LR
// in every coordinate (Kingma & Ba 2015, §2.1), so θ moves to LR·sign(c).
func TestESGradientEstimate(t *testing.T) {
	c := []float32{1, -2, 0.5, -0.25, 3, -1, 2, -3}
	lin := func(_, _ int, x []float32) (float64, error) {
		s := 0.0
		for i, v := range x {
			s += float64(c[i] * v)
		}
		return s, nil
	}
	es := runES(t, ESConfig{Pairs: 2000, LR: 0.1, Seed: 2}, make([]float32, len(c)), lin, 4000)
	for i := range c {
		if (es.Theta[i] > 0) != (c[i] > 0) || math.Abs(math.Abs(float64(es.Theta[i]))-0.1) > 0.02 {
			t.Fatalf("θ after one step %v, want ±0.1 along sign(c) = %v", es.Theta, c)
		}
	}
}

package stats

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"tilebench/internal/seeds"
)

// Probability of improvement worked by hand: x = {1, 3}, y = {2, 3}:
// pairs (1,2) 0, (1,3) 0, (3,2) 1, (3,3) 0.5 → 1.5/4 = 0.375. A second
// stratum x = {5}, y = {0} gives 1; the average over strata is 0.6875.
func TestProbImprovementWorked(t *testing.T) {
	p, err := ProbImprovement(Strata{{1, 3}}, Strata{{2, 3}})
	if err != nil || p != 0.375 {
		t.Fatalf("P = %v, %v; want 0.375", p, err)
	}
	p, _ = ProbImprovement(Strata{{1, 3}, {5}}, Strata{{2, 3}, {0}})
	if p != 0.6875 {
		t.Fatalf("P = %v, want 0.6875", p)
	}
	if _, err := ProbImprovement(Strata{{1}}, Strata{{1}, {2}}); err == nil {
		t.Fatal("mismatched strata accepted")
	}
	var b Bootstrap
	e, err := b.ProbImprovementCI(Strata{{1, 3}, {5}}, Strata{{2, 3}, {0}})
	if err != nil || e.Value != 0.6875 || e.Lo > e.Value || e.Hi < e.Value || e.Resamples != DefaultResamples {
		t.Fatalf("CI %+v, %v", e, err)
	}
}

func normals(seed uint64, k, n int, mu, sd float64) Strata {
	r := seeds.NewRand(seed)
	s := make(Strata, k)
	for i := range s {
		s[i] = make([]float64, n)
		for j := range s[i] {
			s[i][j] = mu + float64(i)*10 + sd*r.NormFloat64()
		}
	}
	return s
}

// paired returns k strata of n normalised scores: a shared per-seed
// effect (sd shared) plus the arm's own noise (sd own) about mu.
func paired(seed uint64, k, n int, mu, shared, own float64, arm uint64) Strata {
	rs, ro := seeds.NewRand(seed), seeds.NewRand(seed+1000*arm+1)
	s := make(Strata, k)
	for i := range s {
		s[i] = make([]float64, n)
		for j := range s[i] {
			s[i][j] = mu + shared*rs.NormFloat64() + own*ro.NormFloat64()
		}
	}
	return s
}

func TestBootstrapDeterministic(t *testing.T) {
	s := normals(9, 3, 20, 10, 4)
	a, _ := Bootstrap{Seed: 5}.CI(s, StatIQM)
	b, _ := Bootstrap{Seed: 5}.CI(s, StatIQM)
	c, _ := Bootstrap{Seed: 6}.CI(s, StatIQM)
	if a != b {
		t.Fatalf("same seed, different intervals: %v %v", a, b)
	}
	if a == c {
		t.Fatalf("different seeds, identical intervals %v", a)
	}
	sum, err := Bootstrap{Seed: 5}.Summarize(s)
	if err != nil {
		t.Fatal(err)
	}
	// Summarize draws the same resamples as CI with the same seed.
	if sum.IQM != a {
		t.Fatalf("Summarize IQM %v, CI %v", sum.IQM, a)
	}
	pool := s.Pool()
	if sum.N != 60 || sum.Mean.Value != Mean(pool) || sum.Median.Value != Median(pool) || sum.Std != StdDev(pool) ||
		sum.Min != slices.Min(pool) || sum.Max != slices.Max(pool) {
		t.Fatalf("summary %+v", sum)
	}
	for _, e := range []Estimate{sum.Mean, sum.Median, sum.IQM} {
		if !(e.Lo <= e.Value && e.Value <= e.Hi) || e.Resamples != DefaultResamples || e.Level != 0.95 {
			t.Fatalf("estimate %+v", e)
		}
	}
}

// Stratification matters: strata with very different means give a much
// narrower interval when resampled within strata than when pooled first
// (the between-strata spread is not resampled).
func TestStratifiedNarrower(t *testing.T) {
	s := Strata{{10, 11, 9, 10.5, 9.5, 10.2}, {50, 52, 48, 51, 49, 50.5}, {90, 91, 89, 92, 88, 90.3}}
	strat, _ := Bootstrap{}.CI(s, StatMean)
	flat, _ := Bootstrap{}.CI(Strata{s.Pool()}, StatMean)
	if w1, w2 := strat.Hi-strat.Lo, flat.Hi-flat.Lo; !(w1 < w2/3) {
		t.Fatalf("stratified width %v, pooled %v", w1, w2)
	}
}

func TestDiffAndRetention(t *testing.T) {
	x, y := normals(1, 2, 40, 100, 5), normals(2, 2, 40, 80, 5)
	d, err := Bootstrap{}.Diff(x, y, StatMean)
	if err != nil || !(d.Lo > 10 && d.Hi < 30) || d.Value != Mean(x.Pool())-Mean(y.Pool()) {
		t.Fatalf("diff %v %v", d, err)
	}
	r, err := Bootstrap{}.Retention(y, x, StatIQM)
	if err != nil || !(r.Lo < r.Value && r.Value < r.Hi && r.Hi < 1) {
		t.Fatalf("retention %v %v", r, err)
	}
	// A clean sample with a positive mean whose resamples can go negative:
	// those resamples count as +Inf, so the interval is open above.
	r, err = Bootstrap{}.Retention(Strata{{1, 2}}, Strata{{5, -1}}, StatMean)
	if err != nil || !math.IsInf(r.Hi, 1) || r.Value != 0.75 {
		t.Fatalf("retention against an unstable clean score: %v %v", r, err)
	}
	_, err = Bootstrap{}.Retention(y, Strata{{-1, 0, -2}}, StatIQM)
	if !errors.Is(err, ErrNotPositive) {
		t.Fatalf("retention against a non-positive clean score: %v", err)
	}
}

func TestBadInput(t *testing.T) {
	good := Strata{{1, 2, 3}}
	for name, f := range map[string]func() error{
		"empty":     func() error { _, err := Bootstrap{}.CI(nil, StatMean); return err },
		"empty str": func() error { _, err := Bootstrap{}.CI(Strata{{1}, {}}, StatMean); return err },
		"nan":       func() error { _, err := Bootstrap{}.CI(Strata{{1, math.NaN()}}, StatMean); return err },
		"inf":       func() error { _, err := Bootstrap{}.Summarize(Strata{{math.Inf(1)}}); return err },
		"resamples": func() error { _, err := Bootstrap{Resamples: -1}.CI(good, StatMean); return err },
		"level":     func() error { _, err := Bootstrap{Level: 1.5}.CI(good, StatMean); return err },
		"statistic": func() error { _, err := Bootstrap{}.CI(good, Statistic(9)); return err },
	} {
		if err := f(); err == nil {
			t.Errorf("%s: no error", name)
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: multi-line error %q", name, err)
		}
	}
}

func TestEstimateString(t *testing.T) {
	for _, c := range []struct {
		e    Estimate
		want string
	}{
		{Estimate{Value: 4123.4, Lo: 3999.6, Hi: 4250}, "4123 [4000, 4250]"},
		{Estimate{Value: 0.5, Lo: 0.4123, Hi: 0.61}, "0.5 [0.412, 0.61]"},
		{Estimate{Value: -100, Lo: -100, Hi: -100}, "-100 [-100, -100]"},
		{Estimate{Value: 12.34, Lo: math.NaN(), Hi: math.Inf(1)}, "12.3 [NaN, +Inf]"},
	} {
		if got := c.e.String(); got != c.want {
			t.Errorf("%#v.String() = %q, want %q", c.e, got, c.want)
		}
	}
}

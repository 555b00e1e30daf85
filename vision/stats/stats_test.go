package stats

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
)

// refData mirrors testdata/ref/bootstrap_ref.json (written by
// testdata/ref/bootstrap_ref.py from Debian numpy/scipy).
type refData struct {
	Format      int `json:"format"`
	Resamples   int `json:"resamples"`
	Percentiles []struct {
		X     []float64 `json:"x"`
		P     []float64 `json:"p"`
		Value []float64 `json:"value"`
	} `json:"percentiles"`
	IQM []struct {
		X      []float64 `json:"x"`
		IQM    float64   `json:"iqm"`
		Median float64   `json:"median"`
		Mean   float64   `json:"mean"`
		Std    *float64  `json:"std"`
	} `json:"iqm"`
	PI []struct {
		X, Y []float64
		P    float64 `json:"p"`
	} `json:"pi"`
	Bootstrap []struct {
		Name   string      `json:"name"`
		Stat   string      `json:"stat"`
		Strata [][]float64 `json:"strata"`
		Den    [][]float64 `json:"den"`
		Value  float64     `json:"value"`
		Lo     float64     `json:"lo"`
		Hi     float64     `json:"hi"`
		SE     float64     `json:"se"`
	} `json:"bootstrap"`
}

func loadRef(t *testing.T, raw []byte) refData {
	t.Helper()
	var d refData
	if err := json.Unmarshal(raw, &d); err != nil {
		t.Fatalf("parse reference: %v", err)
	}
	if d.Format != 1 || len(d.Bootstrap) == 0 || len(d.IQM) == 0 {
		t.Fatalf("reference data incomplete: format %d, %d bootstrap cases", d.Format, len(d.Bootstrap))
	}
	return d
}

func golden(t *testing.T) refData {
	t.Helper()
	raw, err := os.ReadFile(filepath.Join(reftest.Root(), "testdata", "ref", "bootstrap_ref.json"))
	if err != nil {
		t.Fatal(err)
	}
	return loadRef(t, raw)
}

func near(a, b, tol float64) bool { return math.Abs(a-b) <= tol*math.Max(1, math.Abs(b)) }

// Worked examples of the interquartile mean. IQM(1..8) = 4.5 is the example
// of the issue (mean of 3,4,5,6); the odd sizes follow
// scipy.stats.trim_mean(x, 0.25) (drop floor(n/4) each end), values worked
// by hand and confirmed by the golden file below.
func TestIQMWorked(t *testing.T) {
	for _, c := range []struct {
		x    []float64
		want float64
	}{
		{[]float64{1, 2, 3, 4, 5, 6, 7, 8}, 4.5},
		{[]float64{8, 1, 7, 2, 6, 3, 5, 4}, 4.5},      // order does not matter
		{[]float64{1, 2, 3, 4, 5}, 3},                 // drop 1 each end: mean(2,3,4)
		{[]float64{1, 2, 3, 4, 5, 6, 7}, 4},           // drop 1 each end: mean(2..6)
		{[]float64{1, 2, 3}, 2},                       // n < 4: plain mean
		{[]float64{0, 0, 0, 100}, 0},                  // drop 1 each end
		{[]float64{-50, 1, 2, 3, 4, 5, 6, 1000}, 3.5}, // outliers trimmed
	} {
		in := slices.Clone(c.x)
		if got := IQM(c.x); got != c.want {
			t.Errorf("IQM(%v) = %v, want %v", c.x, got, c.want)
		}
		if !slices.Equal(in, c.x) {
			t.Errorf("IQM modified its input")
		}
	}
	if !math.IsNaN(IQM(nil)) || !math.IsNaN(Median(nil)) || !math.IsNaN(Mean(nil)) {
		t.Error("statistics of an empty sample should be NaN")
	}
}

// Against numpy.percentile (linear), scipy.stats.trim_mean(0.25),
// numpy.median, numpy.std(ddof=1) and Mann–Whitney U/(mn) from the golden
// file made by testdata/ref/bootstrap_ref.py.
func TestPointStatisticsGolden(t *testing.T) { checkPoints(t, golden(t)) }

func checkPoints(t *testing.T, d refData) {
	for _, c := range d.Percentiles {
		for i, p := range c.P {
			if got := Percentile(c.X, p); !near(got, c.Value[i], 1e-12) {
				t.Errorf("Percentile(%v, %v) = %v, numpy %v", c.X, p, got, c.Value[i])
			}
		}
	}
	for _, c := range d.IQM {
		if got := IQM(c.X); !near(got, c.IQM, 1e-12) {
			t.Errorf("IQM(%v) = %v, scipy trim_mean %v", c.X, got, c.IQM)
		}
		if got := Median(c.X); !near(got, c.Median, 1e-12) {
			t.Errorf("Median(%v) = %v, numpy %v", c.X, got, c.Median)
		}
		if got := Mean(c.X); !near(got, c.Mean, 1e-12) {
			t.Errorf("Mean(%v) = %v, numpy %v", c.X, got, c.Mean)
		}
		got := StdDev(c.X)
		if c.Std == nil {
			if !math.IsNaN(got) {
				t.Errorf("StdDev of one value = %v, want NaN", got)
			}
		} else if !near(got, *c.Std, 1e-10) {
			t.Errorf("StdDev(%v) = %v, numpy %v", c.X, got, *c.Std)
		}
	}
	for _, c := range d.PI {
		got, err := ProbImprovement(Strata{c.X}, Strata{c.Y})
		if err != nil {
			t.Fatal(err)
		}
		if !near(got, c.P, 1e-12) {
			t.Errorf("ProbImprovement = %v, scipy mannwhitneyu U/(mn) %v", got, c.P)
		}
	}
}

// Bootstrap intervals against scipy.stats.bootstrap(method="percentile")
// on the golden file's fixed data. Both sides draw 20000 resamples from
// different generators, so the ends agree only within Monte-Carlo error:
// the standard error of a 2.5% quantile of B draws is about
// sqrt(p(1-p)/B)/f(q) ≈ 0.019·se for a normal bootstrap distribution of
// standard deviation se (asymptotic quantile variance, Efron & Tibshirani
// 1993 ch. 19, from memory), so the difference of two runs has sd ≈ 0.027·se
// and a tolerance of 0.15·se is over five standard deviations.
func TestBootstrapGolden(t *testing.T) { checkBootstrap(t, golden(t)) }

func checkBootstrap(t *testing.T, d refData) {
	for i, c := range d.Bootstrap {
		b := Bootstrap{Resamples: d.Resamples, Seed: uint64(100 + i)}
		var e Estimate
		var err error
		switch c.Stat {
		case "mean":
			e, err = b.CI(c.Strata, StatMean)
		case "median":
			e, err = b.CI(c.Strata, StatMedian)
		case "iqm":
			e, err = b.CI(c.Strata, StatIQM)
		case "retention-iqm":
			e, err = b.Retention(c.Strata, c.Den, StatIQM)
		default:
			t.Fatalf("unknown reference statistic %q", c.Stat)
		}
		if err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		if !near(e.Value, c.Value, 1e-12) {
			t.Errorf("%s: value %v, scipy %v", c.Name, e.Value, c.Value)
		}
		tol := 0.15 * c.SE
		if math.Abs(e.Lo-c.Lo) > tol || math.Abs(e.Hi-c.Hi) > tol {
			t.Errorf("%s: interval [%.4f, %.4f], scipy [%.4f, %.4f] (tolerance %.4f)", c.Name, e.Lo, e.Hi, c.Lo, c.Hi, tol)
		}
		if e.Resamples != d.Resamples || e.Level != 0.95 {
			t.Errorf("%s: recorded %d resamples at %v", c.Name, e.Resamples, e.Level)
		}
		t.Logf("%s: go [%.4f, %.4f] scipy [%.4f, %.4f] se %.4f", c.Name, e.Lo, e.Hi, c.Lo, c.Hi, c.SE)
	}
}

// TestRefBootstrap runs the reference script live with Debian numpy/scipy
// and checks against its fresh output.
func TestRefBootstrap(t *testing.T) {
	reftest.Need(t, "numpy", "scipy")
	d := loadRef(t, reftest.Run(t, "bootstrap_ref.py"))
	checkPoints(t, d)
	checkBootstrap(t, d)
}

// The counting sampler gives the statistics of the resample it stands for:
// checked against drawing the values and applying the plain functions.
func TestSamplerMatchesValues(t *testing.T) {
	for _, s := range []Strata{
		{{3, 1, 4, 1, 5}, {9, 2, 6}, {5, 3, 5, 8, 9, 7, 9}, {3}}, // 16 scores
		{{2.5, -1, 7}, {0, 0, 1, 8}, {4, 4, 4, 4, 4, 3}},         // 13 scores
	} {
		sp := newSampler(s)
		r1, r2 := seeds.NewRand(11), seeds.NewRand(11)
		buf := make([]float64, s.N())
		for i := 0; i < 500; i++ {
			sp.draw(r1)
			resample(r2, s, buf)
			for _, st := range []Statistic{StatMean, StatMedian, StatIQM} {
				if a, b := sp.stat(st), st.Of(buf); math.Abs(a-b) > 1e-12 {
					t.Fatalf("resample %d %v: sampler %v, values %v (%v)", i, st, a, b, buf)
				}
			}
		}
		sp.full()
		if sp.iqm() != IQM(s.Pool()) || sp.median() != Median(s.Pool()) {
			t.Fatal("full sampler differs from the data")
		}
	}
}

// The counting P(X > Y) equals the one computed from the drawn values.
func TestPISamplerMatchesValues(t *testing.T) {
	x := Strata{{1, 3, 3, 7, 2}, {0.5, 0.5, 9}}
	y := Strata{{3, 2, 2, 8}, {0.5, 1, 0, 4, 4, 9}}
	ps := newPISampler(x, y)
	ps.full()
	want, _ := ProbImprovement(x, y)
	if got := ps.pi(); math.Abs(got-want) > 1e-15 {
		t.Fatalf("full: %v, want %v", got, want)
	}
	r1, r2 := seeds.NewRand(5), seeds.NewRand(5)
	xs, ys := make([]float64, x.N()), make([]float64, y.N())
	for i := 0; i < 500; i++ {
		ps.draw(r1)
		resample(r2, x, xs)
		resample(r2, y, ys)
		if a, b := ps.pi(), piSorted(x, y, xs, ys); math.Abs(a-b) > 1e-15 {
			t.Fatalf("resample %d: counts %v, values %v", i, a, b)
		}
	}
}

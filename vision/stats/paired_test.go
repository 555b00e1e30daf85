package stats

import (
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
)

type pairedRef struct {
	Format     int `json:"format"`
	Resamples  int `json:"resamples"`
	SignedRank []struct {
		Name      string    `json:"name"`
		X         []float64 `json:"x"`
		YY        []float64 `json:"y"`
		Method    string    `json:"method"`
		Statistic float64   `json:"statistic"`
		P         float64   `json:"p"`
	} `json:"signed_rank"`
	BCa    []intervalRef `json:"bca"`
	Paired []intervalRef `json:"paired"`
	Strat  []struct {
		Name  string   `json:"name"`
		Stat  string   `json:"stat"`
		Arms  []Strata `json:"arms"`
		Value float64  `json:"value"`
		Lo    float64  `json:"lo"`
		Hi    float64  `json:"hi"`
		SE    float64  `json:"se"`
	} `json:"stratified"`
	CVaR []struct {
		X     []float64 `json:"x"`
		Alpha float64   `json:"alpha"`
		Value float64   `json:"value"`
	} `json:"cvar"`
}

type intervalRef struct {
	Name   string    `json:"name"`
	Stat   string    `json:"stat"`
	X      []float64 `json:"x"`
	Y      []float64 `json:"y"`
	Value  float64   `json:"value"`
	Lo, Hi float64
	SE     float64 `json:"se"`
}

func loadPairedRef(t *testing.T, raw []byte) pairedRef {
	t.Helper()
	var d pairedRef
	if err := json.Unmarshal(raw, &d); err != nil {
		t.Fatalf("parse reference: %v", err)
	}
	if d.Format != 1 || len(d.SignedRank) == 0 || len(d.BCa) == 0 || len(d.Paired) == 0 || len(d.Strat) == 0 {
		t.Fatalf("paired reference incomplete")
	}
	return d
}

// TestPairedGolden checks against the committed output of
// testdata/ref/paired_ref.py; TestRefPaired runs the script live.
func TestPairedGolden(t *testing.T) {
	raw, err := os.ReadFile(filepath.Join(reftest.Root(), "testdata", "ref", "paired_ref.json"))
	if err != nil {
		t.Fatal(err)
	}
	checkPaired(t, loadPairedRef(t, raw))
}

func TestRefPaired(t *testing.T) {
	reftest.Need(t, "numpy", "scipy")
	checkPaired(t, loadPairedRef(t, reftest.Run(t, "paired_ref.py")))
}

func checkPaired(t *testing.T, d pairedRef) {
	// Signed-rank: scipy.stats.wilcoxon(zero_method="wilcox",
	// correction=False), exact or approx as the script chose; the exact
	// null distribution and the normal approximation are deterministic, so
	// the p-values agree to rounding.
	for _, c := range d.SignedRank {
		got, err := SignedRankTest(c.X, c.YY)
		if err != nil {
			t.Fatal(err)
		}
		if got.Exact != (c.Method == "exact") || !near(got.Statistic, c.Statistic, 1e-12) || !near(got.P, c.P, 1e-9) {
			t.Errorf("%s: signed-rank %+v, scipy %s statistic %v p %v", c.Name, got, c.Method, c.Statistic, c.P)
		}
	}
	// Intervals: both sides draw 20000 resamples from different
	// generators, so the ends agree within Monte-Carlo error only; the
	// tolerance 0.15·se is over five standard deviations of the difference
	// of two runs' percentile ends (see TestBootstrapGolden). BCa ends sit
	// further in the tails, where the bootstrap density is thinner: 0.25·se.
	check := func(kind string, c intervalRef, e Estimate, tolSE float64) {
		t.Helper()
		if !near(e.Value, c.Value, 1e-9) {
			t.Errorf("%s %s: value %v, reference %v", kind, c.Name, e.Value, c.Value)
		}
		tol := tolSE * c.SE
		if math.Abs(e.Lo-c.Lo) > tol || math.Abs(e.Hi-c.Hi) > tol {
			t.Errorf("%s %s: [%.4f, %.4f], reference [%.4f, %.4f] (tolerance %.4f)", kind, c.Name, e.Lo, e.Hi, c.Lo, c.Hi, tol)
		}
		t.Logf("%s %s: go [%.4f, %.4f] (%s) ref [%.4f, %.4f]", kind, c.Name, e.Lo, e.Hi, e.Method, c.Lo, c.Hi)
	}
	b := Bootstrap{Resamples: d.Resamples, Seed: 41}
	stat := func(s string) Statistic {
		switch s {
		case "mean", "diff-mean":
			return StatMean
		}
		return StatIQM
	}
	// scipy.stats.bootstrap(method="BCa"), Efron 1987.
	for _, c := range d.BCa {
		var e Estimate
		var err error
		if c.Y == nil {
			var rep *Replicates
			rep, err = b.PairedReplicates(Arms{{c.X}}, stat(c.Stat), func(v []float64) float64 { return v[0] })
			if err == nil {
				e = rep.Estimate(0.95)
			}
		} else {
			e, err = b.PairedDiff(Strata{c.X}, Strata{c.Y}, stat(c.Stat))
		}
		if err != nil {
			t.Fatal(err)
		}
		if e.Method != MethodBCa {
			t.Errorf("%s: %d seeds used %s, want BCa", c.Name, len(c.X), e.Method)
		}
		check("BCa", c, e, 0.25)
	}
	// scipy.stats.bootstrap(paired=True, method="percentile").
	for _, c := range d.Paired {
		var e Estimate
		var err error
		switch c.Stat {
		case "ratio-iqm":
			e, err = b.PairedRatio(Strata{c.X}, Strata{c.Y}, StatIQM)
		default:
			e, err = b.PairedDiff(Strata{c.X}, Strata{c.Y}, stat(c.Stat))
		}
		if err != nil {
			t.Fatal(err)
		}
		check("paired", c, e, 0.15)
	}
	// The script's own NumPy paired bootstrap over strata and the
	// normalised score (Mnih et al. 2015 normalisation, resampled paired).
	for _, c := range d.Strat {
		var e Estimate
		var err error
		switch c.Stat {
		case "normalised":
			e, err = b.Normalized(c.Arms[0], c.Arms[1], c.Arms[2], StatIQM)
		case "normalised-diff":
			// Two policies' retentions over one floor, resampled together.
			e, err = b.NormalizedDiff(c.Arms[0], c.Arms[1], c.Arms[2], c.Arms[3], c.Arms[4], StatIQM)
		default:
			e, err = b.PairedDiff(c.Arms[0], c.Arms[1], StatIQM)
		}
		if err != nil {
			t.Fatal(err)
		}
		check("stratified", intervalRef{Name: c.Name, Value: c.Value, Lo: c.Lo, Hi: c.Hi, SE: c.SE}, e, 0.15)
	}
	// CVaR (Chan et al. 2020) by the integral of the quantile function.
	for _, c := range d.CVaR {
		got, err := CVaR(c.X, c.Alpha)
		if err != nil || !near(got, c.Value, 1e-12) {
			t.Errorf("CVaR(%v, %v) = %v %v, NumPy %v", c.X, c.Alpha, got, err, c.Value)
		}
	}
}

// Worked examples: CVaR(1..10) at 10% is the worst value, 1; at 25% it
// is (1 + 2 + 0.5·3)/2.5 = 1.8 (the quantile integral of Chan et al.
// 2020, worked by hand).
func TestCVaRWorked(t *testing.T) {
	x := []float64{10, 9, 8, 7, 6, 5, 4, 3, 2, 1}
	if v, _ := CVaR(x, 0); v != 1 {
		t.Errorf("CVaR 10%% = %v, want 1", v)
	}
	if v, _ := CVaR(x, 0.25); math.Abs(v-1.8) > 1e-12 {
		t.Errorf("CVaR 25%% = %v, want 1.8", v)
	}
	if v, _ := CVaR(x, 1); v != 5.5 {
		t.Errorf("CVaR 100%% = %v, want the mean 5.5", v)
	}
	if _, err := CVaR(nil, 0.1); err == nil {
		t.Error("CVaR of nothing accepted")
	}
	if _, err := CVaR(x, 1.5); err == nil {
		t.Error("level 1.5 accepted")
	}
}

// Worked Wilson example: 0 failures in 30 episodes, 95%: the upper end
// is z²/(n + z²) = 3.8415/33.8415 = 0.1135 (Wilson 1927's formula at
// p̂ = 0, worked by hand); 3 of 30 gives [0.0346, 0.2562] (Newcombe
// 1998's method 3, worked by hand from the formula).
func TestRateWilson(t *testing.T) {
	r := NewRate(0, 30, 0.95)
	if r.Lo != 0 || math.Abs(r.Hi-0.11352) > 1e-4 || r.Value != 0 {
		t.Errorf("0/30: %+v", r)
	}
	r = NewRate(3, 30, 0)
	if math.Abs(r.Lo-0.03458) > 1e-4 || math.Abs(r.Hi-0.25621) > 1e-4 || r.String() != "3/30 (10% [3.46, 25.6])" {
		t.Errorf("3/30: %+v %s", r, r)
	}
	if r := NewRate(0, 0, 0); !math.IsNaN(r.Value) || r.String() != "0/0" {
		t.Errorf("0/0: %+v", r)
	}
}

// Pairing narrows: two arms that share a large per-seed effect have a
// much narrower paired difference interval than the unpaired one.
func TestPairedNarrower(t *testing.T) {
	x, y := paired(7, 1, 40, 100, 30, 3, 1), paired(7, 1, 40, 95, 30, 3, 2)
	p, err := Bootstrap{}.PairedDiff(x, y, StatIQM)
	if err != nil {
		t.Fatal(err)
	}
	u, _ := Bootstrap{}.Diff(x, y, StatIQM)
	if w1, w2 := p.Hi-p.Lo, u.Hi-u.Lo; !(w1 < w2/3) || !(p.Lo > 0) {
		t.Fatalf("paired %v (width %.3g), unpaired %v (width %.3g)", p, w1, u, w2)
	}
	c, err := Bootstrap{}.Compare(x, y, StatIQM)
	if err != nil || c.Diff != p || c.Unpaired != u || c.Seeds != 40 || !(c.Test.P < 0.01) {
		t.Fatalf("Compare %+v %v", c, err)
	}
	if _, err := (Bootstrap{}).PairedDiff(x, Strata{y[0][:10]}, StatIQM); err == nil {
		t.Fatal("unmatched seeds accepted")
	}
	if _, err := (Bootstrap{}).Normalized(x, Strata{{-1, -2}}, Strata{{0, 0}}, StatIQM); err == nil {
		t.Fatal("reference below the floor accepted")
	}
}

// Coverage by simulation: the paired normalised-score interval (the
// retention of a stressed cell against its clean cell above a floor, all
// three on shared seeds) covers the true value at about its level, at
// n = 10 (BCa), 30 and 100. The sizes fit CI; -short trims them. (The
// non-inferiority test's type-I error is simulated in package choose.)
func TestCoveragePaired(t *testing.T) {
	trials := 400
	if testing.Short() {
		trials = 120
	}
	const B = 500
	for _, n := range []int{10, 30, 100} {
		cover := 0
		for tr := 0; tr < trials; tr++ {
			r := seeds.NewRand(seeds.DeriveSeed(99, uint64(n), uint64(tr)))
			x, ref, fl := make([]float64, n), make([]float64, n), make([]float64, n)
			for i := 0; i < n; i++ {
				e := 10 * r.NormFloat64() // the seed's difficulty, shared
				fl[i] = -100 + 2*r.NormFloat64()
				ref[i] = 40 + e + 3*r.NormFloat64()
				x[i] = 5 + e + 6*r.NormFloat64()
			}
			bs := Bootstrap{Resamples: B, Seed: uint64(tr)}
			// Symmetric noise: the IQM of each arm estimates its centre,
			// so the true normalised score is (5+100)/(40+100) = 0.75.
			e, err := bs.Normalized(Strata{x}, Strata{ref}, Strata{fl}, StatIQM)
			if err != nil {
				t.Fatal(err)
			}
			if e.Lo <= 0.75 && 0.75 <= e.Hi {
				cover++
			}
		}
		cov := float64(cover) / float64(trials)
		// Binomial slack: 3 standard errors of a proportion at the nominal
		// rate (common practice), plus 0.03 for the bootstrap's own
		// small-sample bias at n = 10.
		se := math.Sqrt(0.95 * 0.05 / float64(trials))
		t.Logf("n=%d: normalised-score coverage %.3f (%d trials)", n, cov, trials)
		if cov < 0.95-3*se-0.03 {
			t.Errorf("n=%d: coverage %.3f below 95%%", n, cov)
		}
	}
}

// A policy against itself: every resample draws the same seeds for both,
// so the difference of normalised scores is 0 in every replicate and the
// interval is exactly [0, 0] (by construction of the paired bootstrap);
// for two policies the value is the difference of the two Normalized
// values computed alone (the definition).
func TestNormalizedDiffSelfAndValue(t *testing.T) {
	x := Strata{{3, 5, 1, 7, 2, 9, 4, 6}}
	ref := Strata{{10, 12, 9, 14, 11, 13, 10, 12}}
	fl := Strata{{0, 1, 0, 1, 0, 1, 0, 1}}
	b := Bootstrap{Resamples: 500, Seed: 3}
	e, err := b.NormalizedDiff(x, ref, x, ref, fl, StatIQM)
	if err != nil {
		t.Fatal(err)
	}
	if e.Value != 0 || e.Lo != 0 || e.Hi != 0 {
		t.Errorf("A − A = %v, want exactly 0 [0, 0]", e)
	}
	y := Strata{{1, 2, 0, 3, 1, 4, 2, 2}}
	d, err := b.NormalizedDiff(x, ref, y, ref, fl, StatIQM)
	if err != nil {
		t.Fatal(err)
	}
	na, _ := b.Normalized(x, ref, fl, StatIQM)
	nb, _ := b.Normalized(y, ref, fl, StatIQM)
	if math.Abs(d.Value-(na.Value-nb.Value)) > 1e-12 || !(d.Lo > 0) {
		t.Errorf("A − B = %v, want %v with the interval above 0", d, na.Value-nb.Value)
	}
	if _, err := b.NormalizedDiff(x, Strata{{0, 0, 0, 0, 0, 0, 0, 0}}, y, ref, fl, StatIQM); !errors.Is(err, ErrNoSpan) {
		t.Errorf("a reference at the floor: %v, want ErrNoSpan", err)
	}
}

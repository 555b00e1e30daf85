package stats

import (
	"errors"
	"math"
	"slices"
	"strings"
	"testing"

	"tilebench/internal/seeds"
)

// Worked example, by hand: (1,5) (2,4) (3,7) (4,7) (5,9) (3,7 again)
// (2.5,NaN). (2,4) is dominated by (1,5); (4,7) by (3,7); the repeated
// (3,7) by its first copy; the NaN point is left out.
func TestParetoFrontWorked(t *testing.T) {
	pts := []Point{{1, 5}, {2, 4}, {3, 7}, {4, 7}, {5, 9}, {3, 7}, {2.5, math.NaN()}}
	if got, want := ParetoFront(pts), []int{0, 2, 4}; !slices.Equal(got, want) {
		t.Fatalf("front %v, want %v", got, want)
	}
	// Same cost, higher score wins whatever the order.
	if got := ParetoFront([]Point{{2, 1}, {2, 3}, {1, 0}}); !slices.Equal(got, []int{2, 1}) {
		t.Fatalf("front %v, want [2 1]", got)
	}
	if got := ParetoFront(nil); len(got) != 0 {
		t.Fatalf("front of nothing: %v", got)
	}
}

// Brute-force check of the definition on random point sets.
func TestParetoFrontDefinition(t *testing.T) {
	r := seeds.NewRand(3)
	for trial := 0; trial < 200; trial++ {
		pts := make([]Point, 1+r.IntN(12))
		for i := range pts {
			pts[i] = Point{float64(r.IntN(6)), float64(r.IntN(6))}
		}
		front := ParetoFront(pts)
		for i, p := range pts {
			dominated, dupBefore := false, false
			for j, q := range pts {
				if q.Cost <= p.Cost && q.Score >= p.Score && (q.Cost < p.Cost || q.Score > p.Score) {
					dominated = true
				}
				if j < i && q == p {
					dupBefore = true
				}
			}
			if in := slices.Contains(front, i); in == (dominated || dupBefore) {
				t.Fatalf("%v: point %d %v in front = %v, dominated %v", pts, i, p, in, dominated)
			}
		}
	}
}

func ret(v float64) Estimate { return Estimate{Value: v, Lo: v - 0.1, Hi: v + 0.1} }

func TestBreakingPoint(t *testing.T) {
	// ret(v) has the interval v ± 0.1: only retention 0.3 (at 0.6) lies
	// wholly below 0.5; 0.49 at 0.4 dips below by its point estimate only.
	levels := []Level{{0.6, ret(0.3)}, {0, ret(1)}, {0.2, ret(0.8)}, {0.4, ret(0.49)}, {0.8, ret(0.6)}}
	b, err := BreakingPoint(levels, 0)
	if err != nil {
		t.Fatal(err)
	}
	if !b.Reached || b.Severity != 0.6 || b.FirstDip != 0.4 || b.Threshold != 0.5 || b.String() != "0.6" || b.DipString() != "0.4" || b.Min != 0 || b.AtStart() {
		t.Fatalf("break %+v (%s), want 0.6 (first dip 0.4) at threshold 0.5, not at the start", b, b)
	}
	// A noisy curve about the threshold (0.36, 0.31, 0.33 with wide
	// intervals) does not break, though its first point dips below.
	noisy := []Level{{0.1, Estimate{Value: 0.36, Lo: 0.2, Hi: 0.55}}, {0.2, Estimate{Value: 0.31, Lo: 0.1, Hi: 0.52}}, {0.3, Estimate{Value: 0.33, Lo: 0.15, Hi: 0.51}}}
	if b, _ := BreakingPoint(noisy, 0.4); b.Reached || b.FirstDip != 0.1 {
		t.Fatalf("noisy curve: %+v", b)
	}
	// Wholly below the threshold at the smallest severity already.
	if b, _ := BreakingPoint([]Level{{0.5, ret(0.2)}, {0.25, ret(0.3)}}, 0); !b.AtStart() || b.Severity != 0.25 || b.Min != 0.25 {
		t.Fatalf("break %+v: want at the start, 0.25", b)
	}
	b, _ = BreakingPoint(levels, 0.25)
	if b.Reached || !math.IsNaN(b.Severity) || b.Max != 0.8 || !strings.Contains(b.String(), "not reached") || b.DipString() != "none" {
		t.Fatalf("break %+v (%s), want not reached", b, b)
	}
	// An upper end exactly at the threshold is not below it.
	b, _ = BreakingPoint([]Level{{1, Estimate{Value: 0.4, Lo: 0.3, Hi: 0.5}}}, 0.5)
	if b.Reached {
		t.Fatal("interval touching the threshold counted as broken")
	}
	for _, bad := range [][]Level{nil, {{math.NaN(), ret(1)}}, {{1, Estimate{Value: math.NaN()}}}} {
		if _, err := BreakingPoint(bad, 0); err == nil {
			t.Errorf("BreakingPoint(%v) gave no error", bad)
		}
	}
	if _, err := BreakingPoint(levels, -1); err == nil {
		t.Error("negative threshold accepted")
	}
}

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

func TestRecommend(t *testing.T) {
	// Cost rises down the list; p8, p6 and p4 score alike (p4 0.005
	// higher), p12 and p16 clearly worse on the normalised scale.
	cands := []Candidate{
		{Name: "p16", Cost: 1, Scores: paired(1, 3, 30, 0.5, 0.1, 0.02, 1)},
		{Name: "p12", Cost: 2, Scores: paired(1, 3, 30, 0.9, 0.1, 0.02, 2)},
		{Name: "p8", Cost: 4, Scores: paired(1, 3, 30, 1, 0.1, 0.02, 3)},
		{Name: "p6", Cost: 8, Scores: paired(1, 3, 30, 1, 0.1, 0.02, 4)},
		{Name: "p4", Cost: 16, Scores: paired(1, 3, 30, 1.005, 0.1, 0.02, 5)},
	}
	ch, err := Recommender{}.Recommend(cands)
	if err != nil {
		t.Fatal(err)
	}
	t.Logf("scores %v\nversus %+v", ch.Score, ch.Versus)
	if cands[ch.Pick].Name != "p8" || !ch.Shown || ch.More != -1 || ch.Margin != DefaultMargin {
		t.Fatalf("pick %d, want p8; scores %v versus %+v", ch.Pick, ch.Score, ch.Versus)
	}
	if ch.Qualifies[0] || ch.Qualifies[1] || !ch.Qualifies[ch.Best] {
		t.Fatalf("qualifies %v", ch.Qualifies)
	}
	if v := ch.Versus[0]; v.Diff.Lo < 0.4 || v.Needed != -1 {
		t.Fatalf("best − p16 %+v should be far past the margin", v)
	}
	// A margin of 0.001: the cheaper sizes cannot be shown so close, so
	// the best is the pick and the evidence asks for more episodes.
	ch, err = Recommender{Margin: 0.001}.Recommend(cands)
	if err != nil {
		t.Fatal(err)
	}
	if ch.Pick != ch.Best || ch.Shown || !ch.Cheaper {
		t.Fatalf("margin 0.001: pick %d best %d shown %v", ch.Pick, ch.Best, ch.Shown)
	}
	// A budget of 3 leaves p16 and p12; p12 is then the best and the pick.
	ch, err = Recommender{Budget: 3}.Recommend(cands)
	if err != nil {
		t.Fatal(err)
	}
	if ch.Pick != 1 || ch.Best != 1 || ch.Affordable[2] {
		t.Fatalf("budget 3: pick %d best %d affordable %v", ch.Pick, ch.Best, ch.Affordable)
	}
	// Nothing affordable.
	ch, err = Recommender{Budget: 0.5}.Recommend(cands)
	if err != nil || ch.Pick != -1 || ch.Best != -1 {
		t.Fatalf("budget 0.5: %+v %v", ch, err)
	}
	if _, err := (Recommender{Budget: -1}).Recommend(cands); err == nil {
		t.Fatal("negative budget accepted")
	}
	bad := slices.Clone(cands)
	bad[2].Scores = Strata{{1}}
	if _, err := (Recommender{}).Recommend(bad); err == nil {
		t.Fatal("mismatched strata accepted")
	}
}

// The pitfalls of the old rule: a cheaper candidate that crashes in a
// fifth of its episodes (normalised score 0 there) is not shown
// non-inferior once a crash is seen, at 10 episodes as at 30.
func TestRecommendCrashingCandidate(t *testing.T) {
	for _, n := range []int{10, 20, 30} {
		picks, seen := 0, 0
		const trials = 40
		for tr := 0; tr < trials; tr++ {
			good := paired(uint64(100+tr), 1, n, 1, 0.02, 0.01, 1)
			crash := paired(uint64(100+tr), 1, n, 1, 0.02, 0.01, 2)
			r := seeds.NewRand(uint64(tr))
			crashes := 0
			for i := range crash[0] {
				if r.Float64() < 0.2 {
					crash[0][i] = 0
					crashes++
				}
			}
			if crashes == 0 {
				// No crash seen: nothing tells the two apart.
				continue
			}
			seen++
			ch, err := Recommender{Bootstrap: Bootstrap{Resamples: 500, Seed: uint64(tr)}, Statistic: StatMean}.Recommend(
				[]Candidate{{Name: "crash", Cost: 1, Scores: crash}, {Name: "good", Cost: 2, Scores: good}})
			if err != nil {
				t.Fatal(err)
			}
			if ch.Pick == 0 {
				picks++
			}
		}
		t.Logf("n=%d: the crashing candidate recommended %d of %d trials that saw a crash", n, picks, seen)
		if picks > 3 {
			t.Errorf("n=%d: the crashing candidate recommended %d of %d times", n, picks, seen)
		}
	}
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
		"empty":      func() error { _, err := Bootstrap{}.CI(nil, StatMean); return err },
		"empty str":  func() error { _, err := Bootstrap{}.CI(Strata{{1}, {}}, StatMean); return err },
		"nan":        func() error { _, err := Bootstrap{}.CI(Strata{{1, math.NaN()}}, StatMean); return err },
		"inf":        func() error { _, err := Bootstrap{}.Summarize(Strata{{math.Inf(1)}}); return err },
		"resamples":  func() error { _, err := Bootstrap{Resamples: -1}.CI(good, StatMean); return err },
		"level":      func() error { _, err := Bootstrap{Level: 1.5}.CI(good, StatMean); return err },
		"statistic":  func() error { _, err := Bootstrap{}.CI(good, Statistic(9)); return err },
		"candidates": func() error { _, err := Recommender{}.Recommend(nil); return err },
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

// A candidate one point worse on a scale of about a thousand (0.001 on
// the normalised scale) is shown non-inferior, and so recommended, in
// most trials at 30 episodes: the margin is what it is for.
func TestRecommendNearlyEqualCandidate(t *testing.T) {
	picks := 0
	const trials = 40
	for tr := 0; tr < trials; tr++ {
		best := paired(uint64(500+tr), 2, 30, 1, 0.1, 0.02, 1)
		near := paired(uint64(500+tr), 2, 30, 0.999, 0.1, 0.02, 2)
		ch, err := Recommender{Bootstrap: Bootstrap{Resamples: 500, Seed: uint64(tr)}}.Recommend(
			[]Candidate{{Name: "near", Cost: 1, Scores: near}, {Name: "best", Cost: 2, Scores: best}})
		if err != nil {
			t.Fatal(err)
		}
		if ch.Pick == 0 {
			picks++
		}
	}
	t.Logf("the nearly equal cheaper candidate recommended in %d of %d trials", picks, trials)
	if picks < trials*3/4 {
		t.Errorf("nearly equal candidate recommended %d of %d times", picks, trials)
	}
}

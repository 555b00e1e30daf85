package choose

import (
	"slices"
	"strings"
	"testing"

	"tilebench/internal/seeds"
	"tilebench/vision/stats"
)

// paired returns k strata of n normalised scores: a shared per-seed
// effect (sd shared) plus the arm's own noise (sd own) about mu.
func paired(seed uint64, k, n int, mu, shared, own float64, arm uint64) stats.Strata {
	rs, ro := seeds.NewRand(seed), seeds.NewRand(seed+1000*arm+1)
	s := make(stats.Strata, k)
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
	bad[2].Scores = stats.Strata{{1}}
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
			ch, err := Recommender{Bootstrap: stats.Bootstrap{Resamples: 500, Seed: uint64(tr)}, Statistic: stats.StatMean}.Recommend(
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

// A candidate one point worse on a scale of about a thousand (0.001 on
// the normalised scale) is shown non-inferior, and so recommended, in
// most trials at 30 episodes: the margin is what it is for.
func TestRecommendNearlyEqualCandidate(t *testing.T) {
	picks := 0
	const trials = 40
	for tr := 0; tr < trials; tr++ {
		best := paired(uint64(500+tr), 2, 30, 1, 0.1, 0.02, 1)
		near := paired(uint64(500+tr), 2, 30, 0.999, 0.1, 0.02, 2)
		ch, err := Recommender{Bootstrap: stats.Bootstrap{Resamples: 500, Seed: uint64(tr)}}.Recommend(
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

// Bad input gives a one-line error.
func TestRecommendBadInput(t *testing.T) {
	good := []Candidate{{Name: "a", Cost: 1, Scores: stats.Strata{{1, 2, 3}}}}
	for name, f := range map[string]func() error{
		"candidates": func() error { _, err := Recommender{}.Recommend(nil); return err },
		"cost": func() error {
			_, err := Recommender{}.Recommend([]Candidate{{Name: "a", Cost: -1, Scores: good[0].Scores}})
			return err
		},
		"resamples": func() error {
			_, err := Recommender{Bootstrap: stats.Bootstrap{Resamples: -1}}.Recommend(good)
			return err
		},
		"statistic": func() error { _, err := Recommender{Statistic: stats.Statistic(9)}.Recommend(good); return err },
		"margin":    func() error { _, err := NonInferiority{Margin: -1}.Test(stats.Arms{good[0].Scores}, 0); return err },
		"best":      func() error { _, err := NonInferiority{}.Test(stats.Arms{good[0].Scores}, 1); return err },
	} {
		if err := f(); err == nil {
			t.Errorf("%s: no error", name)
		} else if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: multi-line error %q", name, err)
		}
	}
}

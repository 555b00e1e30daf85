package choose

import (
	"cmp"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"

	"tilebench/internal/seeds"
	"tilebench/vision/stats"
)

// DefaultMargin is the non-inferiority margin on the normalised scale
// when none is given: 0.05, a twentieth of the distance from the floor
// policy to the reference. A candidate may be that much worse than the
// best and still count as "as good". It is small beside the gaps that
// separate policies of different quality (the whole scale is the gap
// between acting at random and the reference) and large enough to be
// shown with a few dozen episodes per condition at the spreads the
// built-in games show; a study that needs a tighter promise sets
// --margin and runs more episodes.
const DefaultMargin = 0.05

// DefaultAlpha is the family-wise error rate of the non-inferiority
// tests: 0.05, one-sided, the level of the two one-sided tests of
// Schuirmann 1987 (a 90% two-sided interval per comparison before
// correction).
const DefaultAlpha = 0.05

// DefaultPower is the power the episode estimate of a comparison aims at.
const DefaultPower = 0.8

// NonInferiority tests, for each candidate c against the best b, the
// hypothesis H0: θ(b) − θ(c) ≥ Margin against H1: θ(b) − θ(c) < Margin,
// on normalised scores played on shared seeds, by the paired bootstrap
// (BCa below stats.MinPercentileN seeds per stratum) — the one-sided test of
// Schuirmann 1987 ("A comparison of the two one-sided tests procedure and
// the power approach for assessing the equivalence of average
// bioavailability", J. Pharmacokinet. Biopharm. 15) — and corrects the
// K−1 tests with Holm's step-down rule (Holm 1979, "A simple sequentially
// rejective multiple test procedure", Scand. J. Statist. 6), so that the
// chance of calling any inferior candidate non-inferior is at most Alpha.
// The zero value uses DefaultMargin and DefaultAlpha.
type NonInferiority struct {
	// Bootstrap sets resamples and seed; its Level is not used (the
	// bounds are one-sided at the Holm-adjusted level).
	Bootstrap stats.Bootstrap
	// Statistic scores an arm; zero value stats.StatIQM.
	Statistic stats.Statistic
	// Margin is δ on the normalised scale; 0 means DefaultMargin. Must not
	// be negative.
	Margin float64
	// Alpha is the family-wise one-sided error rate; 0 means DefaultAlpha.
	Alpha float64
}

// Comparison is one candidate against the best.
type Comparison struct {
	// Diff is θ(best) − θ(candidate) with its interval: Hi is the
	// one-sided upper bound at the candidate's Holm level, Lo the matching
	// lower bound (a two-sided interval at 1 − 2·level).
	Diff stats.Estimate
	// P is the one-sided p-value of H0 (difference ≥ margin); PAdj the
	// Holm-adjusted p-value.
	P, PAdj float64
	// Level is the one-sided level this comparison was tested at in
	// Holm's sequence.
	Level float64
	// NonInferior is true when H0 is rejected: the candidate is shown to
	// be within Margin of the best. The best itself is always NonInferior.
	NonInferior bool
	// SD is the standard deviation of the per-seed differences (pooled
	// over strata), the spread behind Needed.
	SD float64
	// Needed is the number of seeds per stratum a comparison like this
	// one would need to show non-inferiority with DefaultPower (normal
	// approximation, the observed difference and spread taken as true);
	// 0 when it is already shown, -1 when the observed difference is at
	// or past the margin (no number of episodes is expected to show it).
	Needed int
}

// Test compares every arm with arms[best]. arms must be paired (stats.Arms);
// the result is indexed like arms, and arms[best] gets a zero-difference
// NonInferior comparison.
func (t NonInferiority) Test(arms stats.Arms, best int) ([]Comparison, error) {
	margin, alpha := t.Margin, t.Alpha
	if margin == 0 {
		margin = DefaultMargin
	}
	if alpha == 0 {
		alpha = DefaultAlpha
	}
	if !(margin >= 0) || math.IsInf(margin, 0) {
		return nil, fmt.Errorf("non-inferiority: margin %v must be a non-negative number", t.Margin)
	}
	if !(alpha > 0 && alpha < 0.5) {
		return nil, fmt.Errorf("non-inferiority: alpha %v is outside (0, 0.5)", t.Alpha)
	}
	if err := arms.Check("non-inferiority"); err != nil {
		return nil, err
	}
	if best < 0 || best >= len(arms) {
		return nil, fmt.Errorf("non-inferiority: best arm %d out of range", best)
	}
	out := make([]Comparison, len(arms))
	reps := make([]*stats.Replicates, len(arms))
	var order []int
	for i := range arms {
		if i == best {
			out[i] = Comparison{NonInferior: true, P: 0, PAdj: 0, Diff: stats.Estimate{Level: 1}}
			continue
		}
		bs := t.Bootstrap
		bs.Seed = seeds.DeriveSeed(t.Bootstrap.Seed, uint64(i), seeds.StreamKey("noninferiority"))
		bs.Level = 0.9 // unused by the bounds below; keeps params valid
		rep, err := bs.PairedReplicates(stats.Arms{arms[best], arms[i]}, t.Statistic, func(s []float64) float64 { return s[0] - s[1] })
		if err != nil {
			return nil, err
		}
		reps[i] = rep
		out[i].P = rep.PAbove(margin)
		out[i].SD = pairSD(arms[best], arms[i])
		order = append(order, i)
	}
	// Holm: smallest p first, tested at alpha/(m−j); stop at the first
	// that fails. Adjusted p: running max of (m−j)·p.
	slices.SortStableFunc(order, func(a, b int) int { return cmp.Compare(out[a].P, out[b].P) })
	m := len(order)
	going := true
	run := 0.0
	for j, i := range order {
		lv := alpha / float64(m-j)
		c := &out[i]
		c.Level = lv
		run = math.Max(run, math.Min(1, float64(m-j)*c.P))
		c.PAdj = run
		rep := reps[i]
		c.Diff = stats.Estimate{Value: rep.Value, Lo: rep.Quantile(lv), Hi: rep.Quantile(1 - lv),
			Level: 1 - 2*lv, Resamples: len(rep.Theta), Method: rep.Method()}
		if going && c.P <= lv {
			c.NonInferior = true
		} else {
			going = false
		}
		n := len(arms[best][0])
		c.Needed = neededSeeds(c.Diff.Value, c.SD, margin, lv, DefaultPower)
		if c.NonInferior {
			c.Needed = 0
		} else if c.Needed > 0 && c.Needed <= n {
			// The point estimate says it should be shown at this size; the
			// spread of the bootstrap disagrees: at least one more round.
			c.Needed = n + 1
		}
	}
	return out, nil
}

// pairSD is the standard deviation of the per-seed differences x − y,
// pooled over strata (each stratum's differences taken about that
// stratum's mean difference).
func pairSD(x, y stats.Strata) float64 {
	var ss float64
	df := 0
	for k := range x {
		d := make([]float64, len(x[k]))
		for i := range d {
			d[i] = x[k][i] - y[k][i]
		}
		mu := stats.Mean(d)
		for _, v := range d {
			ss += (v - mu) * (v - mu)
		}
		df += len(d) - 1
	}
	if df <= 0 {
		return math.NaN()
	}
	return math.Sqrt(ss / float64(df))
}

// neededSeeds is the per-stratum sample size at which a one-sided test at
// level alpha of "difference < margin" reaches the given power when the
// difference is diff with per-seed spread sd, by the normal approximation
// n = ((z_{1−α} + z_{power})·sd / (margin − diff))² (common practice; the
// sample-size formula of a one-sided z test). -1 when diff ≥ margin, 0
// when sd is 0.
func neededSeeds(diff, sd, margin, alpha, power float64) int {
	gap := margin - diff
	if !(gap > 0) {
		return -1
	}
	if !(sd > 0) {
		return 0
	}
	z := distuv.UnitNormal.Quantile(1-alpha) + distuv.UnitNormal.Quantile(power)
	n := math.Ceil(math.Pow(z*sd/gap, 2))
	if n > 1e9 {
		return 1e9
	}
	return max(int(n), 2)
}

// HolmRule is the one-line description of the recommendation rule, for
// reports.
const HolmRule = "the cheapest candidate within the budget shown non-inferior to the best: the paired bootstrap upper bound of (normalised score of the best − candidate) lies below the margin, one-sided tests (Schuirmann 1987) with Holm's correction (Holm 1979) over the comparisons"

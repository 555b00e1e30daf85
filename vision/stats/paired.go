package stats

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"

	"gonum.org/v1/gonum/stat/distuv"

	"tilebench/internal/seeds"
)

// Pairing: every cell of a study plays the same game seeds (common random
// numbers, Glasserman & Yao 1992, "Some guidelines and guarantees for
// common random numbers", Management Science 38), so two cells' episodes
// with the same episode index are a matched pair. Resampling the seeds,
// and taking every arm's episode of a drawn seed together, keeps the
// positive correlation between the arms that makes a difference between
// them far less noisy than two independent resamples would say.

// Arms holds the scores of several arms (policies, cells) on shared seeds:
// Arms[a] is arm a as Strata, and stratum k of every arm holds the same
// seeds in the same order, so Arms[a][k][i] and Arms[b][k][i] were played
// on one seed. Strata are conditions (the clean cell, each stress cell)
// or seed blocks; a single condition is Strata{x}.
type Arms []Strata

// Check returns an error, prefixed by what, unless a holds at least one
// arm, every arm has at least one stratum, no empty stratum and only
// finite scores, and all arms are paired: the same number of strata, and
// of seeds in each.
func (a Arms) Check(what string) error {
	if len(a) == 0 {
		return fmt.Errorf("%s: no arms", what)
	}
	for j, s := range a {
		if err := s.check(fmt.Sprintf("%s: arm %d", what, j)); err != nil {
			return err
		}
		if len(s) != len(a[0]) {
			return fmt.Errorf("%s: arm %d has %d strata, arm 0 has %d: not paired", what, j, len(s), len(a[0]))
		}
		for k := range s {
			if len(s[k]) != len(a[0][k]) {
				return fmt.Errorf("%s: arm %d stratum %d holds %d seeds, arm 0 holds %d: not paired", what, j, k, len(s[k]), len(a[0][k]))
			}
		}
	}
	return nil
}

// MinPercentileN is the fewest seeds per stratum for which the paired
// intervals use the percentile method; below it they use BCa (Efron 1987,
// "Better bootstrap confidence intervals", JASA 82), whose bias and
// acceleration corrections matter most for small samples. Twenty is
// common practice.
const MinPercentileN = 20

// Methods an Estimate's interval can come from.
const (
	MethodPercentile = "percentile"
	MethodBCa        = "BCa"
)

// Replicates are the bootstrap replicates of a paired statistic with what
// BCa needs, so that several bounds and tests can be read from one run.
type Replicates struct {
	// Value is the statistic of the full data.
	Value float64
	// Theta are the resampled statistics, ascending.
	Theta []float64
	// Jack are the leave-one-seed-out values (for BCa), nil when the
	// percentile method applies.
	Jack []float64
}

// paired draws B paired resamples of arms: in every resample each
// stratum's seed indices are drawn once, with replacement, and every arm
// takes its scores at those indices. f maps the arms' statistics to the
// estimate. With fewer than MinPercentileN seeds in the smallest stratum
// it also computes the jackknife for BCa.
func (b Bootstrap) paired(what string, arms Arms, st Statistic, f func(s []float64) float64) (*Replicates, int, float64, error) {
	B, lv, err := b.Params()
	if err != nil {
		return nil, 0, 0, err
	}
	if err := st.valid(); err != nil {
		return nil, 0, 0, err
	}
	if err := arms.Check(what); err != nil {
		return nil, 0, 0, err
	}
	sv := make([]float64, len(arms))
	for j, s := range arms {
		sv[j] = st.inPlace(s.Pool())
	}
	rep := &Replicates{Value: f(sv), Theta: make([]float64, B)}
	sps := make([]*sampler, len(arms))
	for j, s := range arms {
		sps[j] = newSampler(s)
	}
	strata := arms[0]
	idx := make([][]int, len(strata))
	minN := math.MaxInt
	for k, x := range strata {
		idx[k] = make([]int, len(x))
		minN = min(minN, len(x))
	}
	r := seeds.NewRand(b.Seed)
	for i := range rep.Theta {
		drawIdx(r, idx)
		for j, sp := range sps {
			sp.drawAt(idx)
			sv[j] = sp.stat(st)
		}
		rep.Theta[i] = f(sv)
	}
	slices.Sort(rep.Theta)
	if minN < MinPercentileN {
		rep.Jack = jackknife(arms, st, f)
	}
	return rep, B, lv, nil
}

func drawIdx(r *rand.Rand, idx [][]int) {
	for _, ix := range idx {
		m := len(ix)
		for j := range ix {
			ix[j] = r.IntN(m)
		}
	}
}

// drawAt fills count with the resample that takes, in stratum k, the
// scores at indices idx[k].
func (sp *sampler) drawAt(idx [][]int) {
	clear(sp.count)
	for k, rk := range sp.rank {
		for _, i := range idx[k] {
			sp.count[rk[i]]++
		}
	}
}

// jackknife returns the statistic with each seed left out in turn (of
// every arm at once), seeds taken stratum by stratum. A stratum of one
// seed is never emptied: that seed is skipped.
func jackknife(arms Arms, st Statistic, f func(s []float64) float64) []float64 {
	var out []float64
	sv := make([]float64, len(arms))
	var buf []float64
	for k, x := range arms[0] {
		if len(x) < 2 {
			continue
		}
		for i := range x {
			for j, s := range arms {
				buf = buf[:0]
				for kk, y := range s {
					if kk == k {
						buf = append(buf, y[:i]...)
						buf = append(buf, y[i+1:]...)
						continue
					}
					buf = append(buf, y...)
				}
				sv[j] = st.inPlace(buf)
			}
			out = append(out, f(sv))
		}
	}
	return out
}

var stdNormal = distuv.UnitNormal

// bcaParams returns BCa's bias correction z0 and acceleration a, as
// scipy.stats.bootstrap computes them: z0 = Φ⁻¹ of the share of
// replicates below the estimate (ties counting one half), a from the
// jackknife's skewness (Efron 1987, eq. 6.6). ok is false when they are
// not finite (every replicate on one side, or a constant jackknife).
func (r *Replicates) bcaParams() (z0, a float64, ok bool) {
	below, upTo := 0, 0
	for _, t := range r.Theta {
		if t < r.Value {
			below++
		}
		if t <= r.Value {
			upTo++
		}
	}
	z0 = stdNormal.Quantile(float64(below+upTo) / (2 * float64(len(r.Theta))))
	var mean float64
	for _, v := range r.Jack {
		mean += v
	}
	mean /= float64(len(r.Jack))
	var num, den float64
	for _, v := range r.Jack {
		d := mean - v
		num += d * d * d
		den += d * d
	}
	if den > 0 {
		a = num / (6 * math.Pow(den, 1.5))
	}
	ok = !math.IsInf(z0, 0) && !math.IsNaN(z0) && !math.IsNaN(a)
	return z0, a, ok
}

// Method is MethodBCa when the replicates carry a jackknife, else
// MethodPercentile.
func (r *Replicates) Method() string {
	if r.Jack != nil {
		return MethodBCa
	}
	return MethodPercentile
}

// Quantile returns the bound below which a share q of the bootstrap
// distribution lies: the q-th percentile (numpy "linear") for the
// percentile method, the BCa-adjusted percentile
// Φ(z0 + (z0+z_q)/(1 − a(z0+z_q))) otherwise. When BCa's corrections are
// not finite (a degenerate distribution) it falls back to the percentile.
func (r *Replicates) Quantile(q float64) float64 {
	if r.Jack != nil {
		if z0, a, ok := r.bcaParams(); ok {
			zq := stdNormal.Quantile(q)
			q = stdNormal.CDF(z0 + (z0+zq)/(1-a*(z0+zq)))
		}
	}
	return percentileSorted(r.Theta, 100*q)
}

// Interval returns the two-sided interval at level lv.
func (r *Replicates) Interval(lv float64) (lo, hi float64) {
	a := (1 - lv) / 2
	return r.Quantile(a), r.Quantile(1 - a)
}

// Estimate returns the value with its two-sided interval at level lv.
func (r *Replicates) Estimate(lv float64) Estimate {
	e := Estimate{Value: r.Value, Level: lv, Resamples: len(r.Theta), Method: r.Method()}
	e.Lo, e.Hi = r.Interval(lv)
	return e
}

// PAbove returns the one-sided bootstrap p-value of the hypothesis
// "the statistic is at least d" against "it is below d": the smallest α
// at which the upper bound Quantile(1−α) falls below d. For the
// percentile method that is the share of replicates at or above d
// (counted as (k+1)/(B+1), so never 0); for BCa the percentile of d is
// mapped back through BCa's adjustment.
func (r *Replicates) PAbove(d float64) float64 {
	B := len(r.Theta)
	k := B - lowerCount(r.Theta, d)    // replicates ≥ d
	q := 1 - float64(k+1)/float64(B+1) // share below d
	if r.Jack != nil {
		if z0, a, ok := r.bcaParams(); ok {
			// q stays inside (0, 1): a d beyond every replicate gives the
			// smallest p the resamples can show, not an infinite z.
			q = min(max(q, 0.5/float64(B)), 1-0.5/float64(B))
			// Solve Φ⁻¹(q) = z0 + (z0+z)/(1 − a(z0+z)) for z.
			w := stdNormal.Quantile(q) - z0
			z := w/(1+a*w) - z0
			if p := 1 - stdNormal.CDF(z); !math.IsNaN(p) {
				return p
			}
		}
	}
	return 1 - q
}

// lowerCount is the number of values in ascending x strictly below v.
func lowerCount(x []float64, v float64) int {
	i, _ := slices.BinarySearch(x, v)
	return i
}

// PairedReplicates runs the paired bootstrap of f(stat(arm 0), stat(arm
// 1), ...) over arms and returns its replicates, for callers that read
// several bounds or tests from one run.
func (b Bootstrap) PairedReplicates(arms Arms, st Statistic, f func(s []float64) float64) (*Replicates, error) {
	rep, _, _, err := b.paired("paired bootstrap", arms, st, f)
	return rep, err
}

// PairedDiff estimates stat(x) − stat(y) for x and y played on the same
// seeds (stratum k and index i the same seed in both), with the paired
// bootstrap interval: seeds are resampled, each drawn seed bringing both
// its x and its y score. Below MinPercentileN seeds per stratum the
// interval is BCa, else percentile. This is the comparison to use
// whenever two cells or two policies share seeds.
func (b Bootstrap) PairedDiff(x, y Strata, st Statistic) (Estimate, error) {
	rep, _, lv, err := b.paired("paired difference", Arms{x, y}, st, func(s []float64) float64 { return s[0] - s[1] })
	if err != nil {
		return Estimate{}, err
	}
	return rep.Estimate(lv), nil
}

// PairedRatio estimates stat(x) / stat(y) on shared seeds with the paired
// bootstrap interval. stat(y) must be positive (else ErrNotPositive); a
// resample whose stat(y) is not positive gives +Inf.
func (b Bootstrap) PairedRatio(x, y Strata, st Statistic) (Estimate, error) {
	if err := (Arms{x, y}).Check("paired ratio"); err != nil {
		return Estimate{}, err
	}
	if d := st.Of(y.Pool()); !(d > 0) {
		return Estimate{}, fmt.Errorf("paired ratio: %w (%s %.4g)", ErrNotPositive, st, d)
	}
	rep, _, lv, err := b.paired("paired ratio", Arms{x, y}, st, func(s []float64) float64 { return ratio(s[0], s[1]) })
	if err != nil {
		return Estimate{}, err
	}
	return rep.Estimate(lv), nil
}

// ErrNoSpan is returned (wrapped) by Normalized when the reference does
// not score above the floor, so that the normalised scale has no length.
var ErrNoSpan = errors.New("reference does not score above the floor")

// Normalized estimates the normalised score
//
//	(stat(x) − stat(floor)) / (stat(ref) − stat(floor))
//
// of x against a floor (a baseline policy: doing nothing, acting at
// random) and a reference (the policy's own clean score: retention; the
// scripted expert: share of expert), the normalisation of Mnih et al.
// 2015 ("Human-level control through deep reinforcement learning",
// Nature 518) and Agarwal et al. 2021. 0 is the floor's score, 1 the
// reference's, and the value stays meaningful when returns are negative,
// unlike a plain ratio. All three were played on the same seeds and are
// resampled together (paired bootstrap). ref must score above floor
// (else ErrNoSpan); a resample where it does not gives ±Inf (by the
// sign of stat(x) − stat(floor)), so that such resamples widen the
// interval honestly. When
// floor is nil the floor is 0 and the value is the plain ratio.
func (b Bootstrap) Normalized(x, ref, floor Strata, st Statistic) (Estimate, error) {
	arms := Arms{x, ref}
	if floor != nil {
		arms = append(arms, floor)
	}
	if err := arms.Check("normalised score"); err != nil {
		return Estimate{}, err
	}
	fl := 0.0
	if floor != nil {
		fl = st.Of(floor.Pool())
	}
	if span := st.Of(ref.Pool()) - fl; !(span > 0) {
		return Estimate{}, fmt.Errorf("normalised score: %w (reference %s %.4g, floor %.4g)", ErrNoSpan, st, span+fl, fl)
	}
	rep, _, lv, err := b.paired("normalised score", arms, st, normalize)
	if err != nil {
		return Estimate{}, err
	}
	return rep.Estimate(lv), nil
}

// NormalizedDiff estimates the difference of two normalised scores on
// shared seeds,
//
//	(stat(xa) − f) / (stat(refa) − f) − (stat(xb) − f) / (stat(refb) − f)
//
// with f = stat(floor) (0 when floor is nil): two policies' retentions,
// each against its own clean score, over one floor. All five arms are
// resampled together (paired bootstrap), so the interval of a policy
// against itself is exactly zero. Both references must score above the
// floor (else ErrNoSpan); a resample where a span is not positive gives
// that score ±Inf as in Normalized, and a resample where both scores are
// the same infinity counts as no difference.
func (b Bootstrap) NormalizedDiff(xa, refa, xb, refb, floor Strata, st Statistic) (Estimate, error) {
	arms := Arms{xa, refa, xb, refb}
	if floor != nil {
		arms = append(arms, floor)
	}
	if err := arms.Check("normalised difference"); err != nil {
		return Estimate{}, err
	}
	fl := 0.0
	if floor != nil {
		fl = st.Of(floor.Pool())
	}
	for _, ref := range []Strata{refa, refb} {
		if span := st.Of(ref.Pool()) - fl; !(span > 0) {
			return Estimate{}, fmt.Errorf("normalised difference: %w (reference %s %.4g, floor %.4g)", ErrNoSpan, st, span+fl, fl)
		}
	}
	rep, _, lv, err := b.paired("normalised difference", arms, st, func(s []float64) float64 {
		var a, c float64
		if len(s) > 4 {
			a, c = normalize([]float64{s[0], s[1], s[4]}), normalize([]float64{s[2], s[3], s[4]})
		} else {
			a, c = normalize(s[0:2]), normalize(s[2:4])
		}
		if a == c {
			return 0
		}
		return a - c
	})
	if err != nil {
		return Estimate{}, err
	}
	return rep.Estimate(lv), nil
}

// normalize maps (x, ref[, floor]) statistics to the normalised score;
// a span that is not positive gives -Inf or +Inf by the numerator's sign,
// so that such resamples sit at the ends of the sorted replicates.
func normalize(s []float64) float64 {
	fl := 0.0
	if len(s) > 2 {
		fl = s[2]
	}
	num, span := s[0]-fl, s[1]-fl
	if !(span > 0) {
		if num < 0 {
			return math.Inf(-1)
		}
		return math.Inf(1)
	}
	return num / span
}

// NearZero reports whether a ratio's denominator interval [lo, hi] comes
// near zero: its lower end is at most a tenth of its value (or not
// positive). A ratio over such a denominator is unstable and its interval
// should be read with a warning. The tenth is common practice.
func NearZero(den Estimate) bool {
	return !(den.Lo > 0.1*math.Abs(den.Value))
}

// PairedComparison is a comparison of two arms on shared seeds, as the
// reports show it.
type PairedComparison struct {
	// Seeds is the number of shared seeds (over all strata).
	Seeds int
	// Diff is stat(x) − stat(y) by the paired bootstrap; Unpaired the
	// same difference with x and y resampled independently, to show what
	// the pairing buys.
	Diff, Unpaired Estimate
	// Test is the Wilcoxon signed-rank test of the per-seed differences
	// x − y, pooled over strata.
	Test SignedRank
}

// Compare compares x and y played on the same seeds (stratum k, index i
// one seed in both): the paired difference of stat with its interval,
// the unpaired interval beside it, and the signed-rank test. It is the
// one call for a policy-against-policy or cell-against-cell comparison.
func (b Bootstrap) Compare(x, y Strata, st Statistic) (PairedComparison, error) {
	d, err := b.PairedDiff(x, y, st)
	if err != nil {
		return PairedComparison{}, err
	}
	u, err := b.Diff(x, y, st)
	if err != nil {
		return PairedComparison{}, err
	}
	t, err := SignedRankTest(x.Pool(), y.Pool())
	if err != nil {
		return PairedComparison{}, err
	}
	return PairedComparison{Seeds: x.N(), Diff: d, Unpaired: u, Test: t}, nil
}

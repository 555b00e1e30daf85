package stats

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strconv"

	"tilebench/internal/seeds"
)

// Strata holds scores grouped by stratum: Strata[k] are the scores of
// stratum k (for example the episodes of one seed block or one stress
// condition). A single unstratified sample is Strata{x}. Every stratum must
// be non-empty and every score finite.
type Strata [][]float64

// Pool returns all scores of s in stratum order, in a new slice.
func (s Strata) Pool() []float64 {
	out := make([]float64, 0, s.N())
	for _, x := range s {
		out = append(out, x...)
	}
	return out
}

// N returns the total number of scores.
func (s Strata) N() int {
	n := 0
	for _, x := range s {
		n += len(x)
	}
	return n
}

func (s Strata) check(what string) error {
	if len(s) == 0 {
		return fmt.Errorf("%s: no scores", what)
	}
	for k, x := range s {
		if len(x) == 0 {
			return fmt.Errorf("%s: stratum %d is empty", what, k)
		}
		for i, v := range x {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("%s: stratum %d score %d is %v", what, k, i, v)
			}
		}
	}
	return nil
}

// Estimate is a point estimate with its bootstrap confidence interval.
type Estimate struct {
	// Value is the statistic of the full data.
	Value float64
	// Lo and Hi are the ends of the percentile interval.
	Lo, Hi float64
	// Level is the interval's confidence level (0.95 by default).
	Level float64
	// Resamples is the number of bootstrap resamples behind Lo and Hi.
	Resamples int
	// Method is how Lo and Hi were read from the resamples: "" or
	// MethodPercentile for the percentile interval, MethodBCa for BCa.
	Method string
}

// String formats e as "value [lo, hi]": three significant digits, or
// whole numbers from 100 up (so 4123.4 is "4123", not "4.12e+03").
func (e Estimate) String() string {
	return short(e.Value) + " [" + short(e.Lo) + ", " + short(e.Hi) + "]"
}

func short(v float64) string {
	if a := math.Abs(v); a >= 100 && a < 1e15 {
		return strconv.FormatFloat(v, 'f', 0, 64)
	}
	return strconv.FormatFloat(v, 'g', 3, 64)
}

// Bootstrap configures the stratified percentile bootstrap. The zero value
// is ready to use.
type Bootstrap struct {
	// Resamples is the number of bootstrap resamples; 0 means 2000
	// (common practice; Agarwal et al. 2021 use 2000 for IQM intervals, from
	// memory). Must not be negative.
	Resamples int
	// Level is the confidence level of the interval, in (0, 1); 0 means
	// 0.95.
	Level float64
	// Seed seeds the resampling stream (seeds.NewRand). Derive one seed per
	// cell, e.g. seeds.DeriveSeed(studySeed, seeds.StreamKey("bootstrap"),
	// cell), so that intervals do not depend on the order cells are done in.
	Seed uint64
}

// DefaultResamples is the resample count used when Bootstrap.Resamples is 0.
const DefaultResamples = 2000

// Params returns the resample count and the confidence level with the
// defaults applied (DefaultResamples, 0.95), or a one-line error naming
// the value that is out of range.
func (b Bootstrap) Params() (resamples int, level float64, err error) {
	n, lv := b.Resamples, b.Level
	if n == 0 {
		n = DefaultResamples
	}
	if n < 0 {
		return 0, 0, fmt.Errorf("bootstrap resamples %d is negative", b.Resamples)
	}
	if lv == 0 {
		lv = 0.95
	}
	if !(lv > 0 && lv < 1) {
		return 0, 0, fmt.Errorf("bootstrap confidence level %v is outside (0, 1)", b.Level)
	}
	return n, lv, nil
}

// interval returns the percentile interval of theta (reordered in place).
func interval(theta []float64, level float64) (lo, hi float64) {
	slices.Sort(theta)
	a := (1 - level) / 2 * 100
	return percentileSorted(theta, a), percentileSorted(theta, 100-a)
}

// resample fills buf (len s.N()) with one stratified resample of s: each
// stratum of size m contributes m draws with replacement from itself (the
// same draws as sampler.draw, as values).
func resample(r *rand.Rand, s Strata, buf []float64) {
	o := 0
	for _, x := range s {
		m := len(x)
		for j := 0; j < m; j++ {
			buf[o+j] = x[r.IntN(m)]
		}
		o += m
	}
}

// CI estimates stat on the pooled strata with its stratified percentile
// bootstrap interval: each resample draws, within every stratum, as many
// scores with replacement as the stratum holds, pools them and applies
// stat; Lo and Hi are the (1-Level)/2 and (1+Level)/2 percentiles (numpy
// "linear") of the resampled statistics. With one stratum this is the
// plain percentile bootstrap of scipy.stats.bootstrap(method="percentile").
func (b Bootstrap) CI(s Strata, st Statistic) (Estimate, error) {
	B, lv, err := b.Params()
	if err != nil {
		return Estimate{}, err
	}
	if err := st.valid(); err != nil {
		return Estimate{}, err
	}
	if err := s.check("bootstrap"); err != nil {
		return Estimate{}, err
	}
	e := Estimate{Value: st.inPlace(s.Pool()), Level: lv, Resamples: B}
	sp := newSampler(s)
	theta := make([]float64, B)
	r := seeds.NewRand(b.Seed)
	for i := range theta {
		sp.draw(r)
		theta[i] = sp.stat(st)
	}
	e.Lo, e.Hi = interval(theta, lv)
	return e, nil
}

// Summary describes one cell's scores.
type Summary struct {
	// N is the number of scores.
	N int
	// Mean, Median and IQM are the point statistics with their stratified
	// bootstrap intervals (the three from the same resamples).
	Mean, Median, IQM Estimate
	// Std is the sample standard deviation (n-1), NaN when N < 2.
	Std float64
	// Min and Max are the extreme scores.
	Min, Max float64
}

// Summarize computes a Summary of s. One resample stream serves the three
// intervals, so Summarize costs about as much as one CI.
func (b Bootstrap) Summarize(s Strata) (Summary, error) {
	B, lv, err := b.Params()
	if err != nil {
		return Summary{}, err
	}
	if err := s.check("summary"); err != nil {
		return Summary{}, err
	}
	buf := s.Pool()
	sum := Summary{N: len(buf), Std: StdDev(buf)}
	slices.Sort(buf)
	sum.Min, sum.Max = buf[0], buf[len(buf)-1]
	est := func(v float64) Estimate { return Estimate{Value: v, Level: lv, Resamples: B} }
	sum.Mean = est(Mean(buf))
	sum.Median = est(medianSorted(buf))
	sum.IQM = est(iqmSorted(buf))
	th := make([]float64, 3*B)
	tMean, tMed, tIQM := th[:B], th[B:2*B], th[2*B:]
	sp := newSampler(s)
	r := seeds.NewRand(b.Seed)
	for i := 0; i < B; i++ {
		sp.draw(r)
		tMean[i], tMed[i], tIQM[i] = sp.mean(), sp.median(), sp.iqm()
	}
	sum.Mean.Lo, sum.Mean.Hi = interval(tMean, lv)
	sum.Median.Lo, sum.Median.Hi = interval(tMed, lv)
	sum.IQM.Lo, sum.IQM.Hi = interval(tIQM, lv)
	return sum, nil
}

// ErrNotPositive is returned (wrapped) by Retention when the clean score is
// not positive, where a ratio means nothing.
var ErrNotPositive = errors.New("clean score is not positive")

// Retention estimates stat(stressed) / stat(clean), the share of its clean
// score a policy keeps under stress, with a stratified percentile bootstrap
// interval in which both samples are resampled independently (each within
// its own strata) for every resample. The clean score must be positive
// (else ErrNotPositive); a resample whose clean statistic is not positive
// gives a ratio of +Inf, so such an interval shows Hi = +Inf honestly.
func (b Bootstrap) Retention(stressed, clean Strata, st Statistic) (Estimate, error) {
	return b.twoSample("retention", "stressed", "clean", stressed, clean, st, ratio, func(den float64) error {
		if !(den > 0) {
			return fmt.Errorf("retention: %w (%s %.4g)", ErrNotPositive, st, den)
		}
		return nil
	})
}

func ratio(n, d float64) float64 {
	if !(d > 0) {
		return math.Inf(1)
	}
	return n / d
}

// Diff estimates stat(x) - stat(y) with a stratified percentile bootstrap
// interval, x and y resampled independently.
func (b Bootstrap) Diff(x, y Strata, st Statistic) (Estimate, error) {
	return b.twoSample("difference", "x", "y", x, y, st,
		func(a, c float64) float64 { return a - c }, nil)
}

// twoSample estimates f(stat(x), stat(y)) with its stratified percentile
// bootstrap interval, x and y resampled independently (x first, then y,
// from one stream) for every resample. checkY, if not nil, vets stat(y)
// of the full data.
func (b Bootstrap) twoSample(what, xn, yn string, x, y Strata, st Statistic,
	f func(sx, sy float64) float64, checkY func(float64) error) (Estimate, error) {
	B, lv, err := b.Params()
	if err != nil {
		return Estimate{}, err
	}
	if err := st.valid(); err != nil {
		return Estimate{}, err
	}
	if err := x.check(what + ": " + xn); err != nil {
		return Estimate{}, err
	}
	if err := y.check(what + ": " + yn); err != nil {
		return Estimate{}, err
	}
	sx, sy := st.inPlace(x.Pool()), st.inPlace(y.Pool())
	if checkY != nil {
		if err := checkY(sy); err != nil {
			return Estimate{}, err
		}
	}
	e := Estimate{Value: f(sx, sy), Level: lv, Resamples: B}
	spx, spy := newSampler(x), newSampler(y)
	theta := make([]float64, B)
	r := seeds.NewRand(b.Seed)
	for i := range theta {
		spx.draw(r)
		spy.draw(r)
		theta[i] = f(spx.stat(st), spy.stat(st))
	}
	e.Lo, e.Hi = interval(theta, lv)
	return e, nil
}

// ProbImprovement returns P(X > Y), the probability of improvement of
// Agarwal et al. 2021: for each stratum k the share of pairs (x_i, y_j)
// with x_i > y_j, ties counting one half (the Mann–Whitney U statistic
// divided by m·n), averaged over strata with equal weight. x and y must
// have the same number of strata (stratum k of x is compared with stratum
// k of y only).
func ProbImprovement(x, y Strata) (float64, error) {
	if err := piCheck(x, y); err != nil {
		return math.NaN(), err
	}
	xs, ys := make([]float64, x.N()), make([]float64, y.N())
	copyStrata(xs, x)
	copyStrata(ys, y)
	return piSorted(x, y, xs, ys), nil
}

// ProbImprovementCI is ProbImprovement with its stratified percentile
// bootstrap interval (both samples resampled within each stratum).
func (b Bootstrap) ProbImprovementCI(x, y Strata) (Estimate, error) {
	B, lv, err := b.Params()
	if err != nil {
		return Estimate{}, err
	}
	if err := piCheck(x, y); err != nil {
		return Estimate{}, err
	}
	xs, ys := make([]float64, x.N()), make([]float64, y.N())
	copyStrata(xs, x)
	copyStrata(ys, y)
	e := Estimate{Value: piSorted(x, y, xs, ys), Level: lv, Resamples: B}
	ps := newPISampler(x, y)
	theta := make([]float64, B)
	r := seeds.NewRand(b.Seed)
	for i := range theta {
		ps.draw(r)
		theta[i] = ps.pi()
	}
	e.Lo, e.Hi = interval(theta, lv)
	return e, nil
}

func piCheck(x, y Strata) error {
	if err := x.check("probability of improvement: x"); err != nil {
		return err
	}
	if err := y.check("probability of improvement: y"); err != nil {
		return err
	}
	if len(x) != len(y) {
		return fmt.Errorf("probability of improvement: %d strata against %d", len(x), len(y))
	}
	return nil
}

func copyStrata(dst []float64, s Strata) {
	o := 0
	for _, v := range s {
		o += copy(dst[o:], v)
	}
}

// piSorted sorts each stratum's stretch of xs and ys in place (laid out as
// the strata of x and y) and returns the stratum-averaged P(X > Y).
func piSorted(x, y Strata, xs, ys []float64) float64 {
	var total float64
	ox, oy := 0, 0
	for k := range x {
		a := xs[ox : ox+len(x[k])]
		c := ys[oy : oy+len(y[k])]
		ox += len(a)
		oy += len(c)
		slices.Sort(a)
		slices.Sort(c)
		// Merge walk: for each a[i], count c below and equal.
		var wins float64
		lo, hi := 0, 0 // c[:lo] < v, c[:hi] <= v
		for _, v := range a {
			for lo < len(c) && c[lo] < v {
				lo++
			}
			if hi < lo {
				hi = lo
			}
			for hi < len(c) && c[hi] <= v {
				hi++
			}
			wins += float64(lo) + 0.5*float64(hi-lo)
		}
		total += wins / (float64(len(a)) * float64(len(c)))
	}
	return total / float64(len(x))
}

// Package stats holds the statistics of a study: point summaries (mean,
// median, interquartile mean, standard deviation), confidence intervals by
// stratified percentile bootstrap, paired over shared seeds, retention and
// normalised scores against a clean score, probability of improvement,
// the signed-rank test, Wilson rates and CVaR. The breaking point of a
// severity axis is in package breakpoint, the patch-size recommendation rule
// and the Pareto front in package choose.
//
// Scores come as Strata: one slice of episode scores per stratum (a seed
// block, a task, a stress condition). The bootstrap resamples within each
// stratum and pools the resampled strata before applying the statistic,
// the stratified bootstrap of Agarwal et al. 2021 ("Deep reinforcement
// learning at the edge of the statistical precipice"); the percentile
// interval is that of Efron & Tibshirani 1993, ch. 13.
//
// Everything is deterministic: the same data, Statistic and Bootstrap
// (including its Seed) give the same bits.
package stats

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/stat"
)

// Statistic names the statistic a bootstrap estimates. The zero value is
// StatIQM.
type Statistic int

const (
	// StatIQM is the interquartile mean (see IQM); the default.
	StatIQM Statistic = iota
	// StatMean is the arithmetic mean.
	StatMean
	// StatMedian is the median (see Median).
	StatMedian
)

// String returns "iqm", "mean" or "median".
func (s Statistic) String() string {
	switch s {
	case StatIQM:
		return "iqm"
	case StatMean:
		return "mean"
	case StatMedian:
		return "median"
	}
	return fmt.Sprintf("statistic(%d)", int(s))
}

// Of returns the statistic of x; x is not modified.
func (s Statistic) Of(x []float64) float64 {
	switch s {
	case StatMean:
		return Mean(x)
	case StatMedian:
		return Median(x)
	default:
		return IQM(x)
	}
}

func (s Statistic) valid() error {
	if s < StatIQM || s > StatMedian {
		return fmt.Errorf("unknown statistic %d", int(s))
	}
	return nil
}

// inPlace evaluates s on buf, which it may reorder.
func (s Statistic) inPlace(buf []float64) float64 {
	switch s {
	case StatMean:
		return Mean(buf)
	default:
		slices.Sort(buf)
		return s.sorted(buf)
	}
}

// sorted evaluates s on an ascending slice.
func (s Statistic) sorted(x []float64) float64 {
	switch s {
	case StatMean:
		return Mean(x)
	case StatMedian:
		return medianSorted(x)
	default:
		return iqmSorted(x)
	}
}

// Mean returns the arithmetic mean of x (NaN for an empty x), via
// gonum/stat.
func Mean(x []float64) float64 {
	if len(x) == 0 {
		return math.NaN()
	}
	return stat.Mean(x, nil)
}

// StdDev returns the sample standard deviation of x (denominator n-1, as
// numpy.std(x, ddof=1)), via gonum/stat; NaN when len(x) < 2.
func StdDev(x []float64) float64 {
	if len(x) < 2 {
		return math.NaN()
	}
	return stat.StdDev(x, nil)
}

// Median returns the median of x: the middle value, or the mean of the two
// middle values for an even count (numpy.median). NaN for an empty x. x is
// not modified.
func Median(x []float64) float64 {
	return medianSorted(sortedCopy(x))
}

// IQM returns the interquartile mean of x (Agarwal et al. 2021): the mean
// of the values left after dropping the lowest and highest quarter.
//
// For n not divisible by 4 it follows scipy.stats.trim_mean(x, 0.25), the
// convention of the paper's own code: k = floor(n/4) values are dropped
// from each end and the remaining n-2k are averaged with equal weight
// (no fractional weights). So IQM(1..8) = mean(3,4,5,6) = 4.5, and
// IQM(1..5) = mean(2,3,4) = 3. For n < 4 nothing is dropped and IQM is the
// mean. NaN for an empty x. x is not modified.
func IQM(x []float64) float64 {
	return iqmSorted(sortedCopy(x))
}

// Percentile returns the p-th percentile (0 ≤ p ≤ 100) of x with linear
// interpolation between closest ranks, numpy.percentile's default
// ("linear", Hyndman & Fan type 7). NaN for an empty x or p outside
// [0, 100]. x is not modified. gonum's stat.Quantile offers other
// definitions but not this one, so it is written here.
func Percentile(x []float64, p float64) float64 {
	return percentileSorted(sortedCopy(x), p)
}

func sortedCopy(x []float64) []float64 {
	c := slices.Clone(x)
	slices.Sort(c)
	return c
}

func medianSorted(x []float64) float64 {
	n := len(x)
	if n == 0 {
		return math.NaN()
	}
	if n%2 == 1 {
		return x[n/2]
	}
	return (x[n/2-1] + x[n/2]) / 2
}

func iqmSorted(x []float64) float64 {
	n := len(x)
	if n == 0 {
		return math.NaN()
	}
	k := n / 4
	var s float64
	for _, v := range x[k : n-k] {
		s += v
	}
	return s / float64(n-2*k)
}

func percentileSorted(x []float64, p float64) float64 {
	n := len(x)
	if n == 0 || !(p >= 0 && p <= 100) {
		return math.NaN()
	}
	h := float64(n-1) * p / 100
	lo := int(math.Floor(h))
	if lo >= n-1 {
		return x[n-1]
	}
	f := h - float64(lo)
	a, b := x[lo], x[lo+1]
	switch {
	case f == 0 || a == b:
		return a
	case math.IsInf(b, 1) || math.IsInf(a, -1):
		// Between a finite value and an infinite one the line is infinite
		// (numpy's formula would give NaN).
		if math.IsInf(a, -1) {
			return a
		}
		return b
	}
	if f >= 0.5 { // numpy's _lerp form, for the same rounding
		return b - (b-a)*(1-f)
	}
	return a + (b-a)*f
}

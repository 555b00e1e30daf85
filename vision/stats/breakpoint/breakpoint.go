// Package breakpoint finds the breaking point of a stress axis: the smallest
// measured severity at which the data show, by a whole confidence interval
// past a threshold, that a policy is broken. BreakingPoint reads retention
// (stressed against clean score, from stats.Bootstrap) and DriftBreak reads
// action drift (from a probe).
package breakpoint

import (
	"cmp"
	"fmt"
	"math"
	"slices"
	"strconv"

	"tilebench/vision/stats"
)

// DefaultBreakThreshold is the retention below which an axis counts as
// broken when no threshold is given.
const DefaultBreakThreshold = 0.5

// Level is one severity of a stress axis with the retention measured there.
type Level struct {
	// Severity is the axis value (occlusion ratio, scramble rate, noise
	// token count, ...); larger means harsher.
	Severity float64
	// Retention is stressed / clean score at this severity (see
	// stats.Bootstrap.Retention).
	Retention stats.Estimate
}

// Break is the breaking point of an axis.
type Break struct {
	// Reached is false when no measured severity broke the policy;
	// Severity is then NaN.
	Reached bool
	// Severity is the smallest measured severity that broke the policy:
	// for BreakingPoint the first whose whole retention interval lies
	// below Threshold, for DriftBreak the first whose whole drift
	// interval lies past it.
	Severity float64
	// Threshold is the threshold that was applied.
	Threshold float64
	// Max is the largest severity measured (so "not reached up to Max").
	Max float64
	// Min is the smallest severity measured. A break at Min means the
	// retention was already below Threshold there: in a context with
	// other stress applied, that context alone broke the policy.
	Min float64
	// FirstDip is the smallest severity whose point estimate alone is
	// below Threshold (NaN when none): a secondary figure that follows
	// the noise of the curve. Set by BreakingPoint only.
	FirstDip float64
}

// AtStart reports whether the break is at the smallest severity measured.
func (b Break) AtStart() bool { return b.Reached && b.Severity == b.Min }

// String returns the severity ("0.3") or "not reached (≤ 0.9)".
func (b Break) String() string {
	if !b.Reached {
		return "not reached (≤ " + strconv.FormatFloat(b.Max, 'g', 4, 64) + ")"
	}
	return strconv.FormatFloat(b.Severity, 'g', 4, 64)
}

// DipString returns the first-dip severity or "none".
func (b Break) DipString() string {
	if math.IsNaN(b.FirstDip) {
		return "none"
	}
	return strconv.FormatFloat(b.FirstDip, 'g', 4, 64)
}

// BreakingPoint returns the smallest severity in levels whose whole
// retention interval lies below threshold (Retention.Hi < threshold):
// the first severity at which the data show, at the interval's level,
// that the policy keeps less than threshold of its (normalised) clean
// score. A noisy curve whose point estimates wander about the threshold
// does not break until an interval clears it. The first severity whose
// point estimate dips below is kept as Break.FirstDip. threshold 0 means
// DefaultBreakThreshold. levels need not be sorted; it is not modified.
// If no interval lies below, the Break is not Reached.
func BreakingPoint(levels []Level, threshold float64) (Break, error) {
	if threshold == 0 {
		threshold = DefaultBreakThreshold
	}
	ls, err := sorted(levels, threshold, func(l Level) float64 { return l.Severity })
	if err != nil {
		return Break{}, err
	}
	for _, l := range ls {
		if math.IsNaN(l.Retention.Value) {
			return Break{}, fmt.Errorf("breaking point: retention at severity %v is NaN", l.Severity)
		}
	}
	br := Break{Severity: math.NaN(), FirstDip: math.NaN(), Threshold: threshold, Max: ls[len(ls)-1].Severity, Min: ls[0].Severity}
	for _, l := range ls {
		if math.IsNaN(br.FirstDip) && l.Retention.Value < threshold {
			br.FirstDip = l.Severity
		}
		if !br.Reached && l.Retention.Hi < threshold {
			br.Reached, br.Severity = true, l.Severity
		}
	}
	return br, nil
}

// DefaultDriftThreshold is the drift beyond which an axis counts as broken
// in a probe when no threshold is given: 0.1, in the action's own units
// (the L2 norm of the change for continuous actions, the share of frames
// whose choice changed for discrete ones).
const DefaultDriftThreshold = 0.1

// DriftLevel is one severity of a stress axis with the drift measured
// there (larger is worse).
type DriftLevel struct {
	Severity float64
	Drift    stats.Estimate
}

// DriftBreak returns the smallest severity whose whole drift interval lies
// past threshold (Drift.Lo > threshold): the first severity at which the
// data say, at the interval's level, that the action moved more than the
// user allows. threshold 0 means DefaultDriftThreshold. levels need not be
// sorted and are not modified. The Break's Threshold is the threshold
// applied; if no level's interval lies past it, the Break is not Reached.
func DriftBreak(levels []DriftLevel, threshold float64) (Break, error) {
	if threshold == 0 {
		threshold = DefaultDriftThreshold
	}
	ls, err := sorted(levels, threshold, func(l DriftLevel) float64 { return l.Severity })
	if err != nil {
		return Break{}, err
	}
	br := Break{Severity: math.NaN(), Threshold: threshold, Max: ls[len(ls)-1].Severity, Min: ls[0].Severity}
	for _, l := range ls {
		if l.Drift.Lo > threshold {
			br.Reached, br.Severity = true, l.Severity
			break
		}
	}
	return br, nil
}

// sorted checks the threshold and the severities of levels and returns a
// copy of levels sorted by severity (stable).
func sorted[T any](levels []T, threshold float64, severity func(T) float64) ([]T, error) {
	if !(threshold > 0) || math.IsInf(threshold, 0) {
		return nil, fmt.Errorf("breaking point: threshold %v must be positive and finite", threshold)
	}
	if len(levels) == 0 {
		return nil, fmt.Errorf("breaking point: no severities")
	}
	for _, l := range levels {
		if s := severity(l); math.IsNaN(s) || math.IsInf(s, 0) {
			return nil, fmt.Errorf("breaking point: severity %v is not finite", s)
		}
	}
	ls := slices.Clone(levels)
	slices.SortStableFunc(ls, func(a, b T) int { return cmp.Compare(severity(a), severity(b)) })
	return ls, nil
}

package stats

import (
	"cmp"
	"fmt"
	"math"
	"slices"
)

// DefaultDriftThreshold is the drift beyond which an axis counts as broken
// in a probe when no threshold is given: 0.1, in the action's own units
// (the L2 norm of the change for continuous actions, the share of frames
// whose choice changed for discrete ones).
const DefaultDriftThreshold = 0.1

// DriftLevel is one severity of a stress axis with the drift measured
// there (larger is worse).
type DriftLevel struct {
	Severity float64
	Drift    Estimate
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
	if !(threshold > 0) || math.IsInf(threshold, 0) {
		return Break{}, fmt.Errorf("breaking point: threshold %v must be positive and finite", threshold)
	}
	if len(levels) == 0 {
		return Break{}, fmt.Errorf("breaking point: no severities")
	}
	ls := slices.Clone(levels)
	for _, l := range ls {
		if math.IsNaN(l.Severity) || math.IsInf(l.Severity, 0) {
			return Break{}, fmt.Errorf("breaking point: severity %v is not finite", l.Severity)
		}
	}
	slices.SortStableFunc(ls, func(a, b DriftLevel) int { return cmp.Compare(a.Severity, b.Severity) })
	br := Break{Severity: math.NaN(), Threshold: threshold, Max: ls[len(ls)-1].Severity, Min: ls[0].Severity}
	for _, l := range ls {
		if l.Drift.Lo > threshold {
			br.Reached, br.Severity = true, l.Severity
			break
		}
	}
	return br, nil
}

package breakpoint

import (
	"math"
	"strings"
	"testing"

	"tilebench/vision/stats"
)

func ret(v float64) stats.Estimate { return stats.Estimate{Value: v, Lo: v - 0.1, Hi: v + 0.1} }

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
	noisy := []Level{{0.1, stats.Estimate{Value: 0.36, Lo: 0.2, Hi: 0.55}}, {0.2, stats.Estimate{Value: 0.31, Lo: 0.1, Hi: 0.52}}, {0.3, stats.Estimate{Value: 0.33, Lo: 0.15, Hi: 0.51}}}
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
	b, _ = BreakingPoint([]Level{{1, stats.Estimate{Value: 0.4, Lo: 0.3, Hi: 0.5}}}, 0.5)
	if b.Reached {
		t.Fatal("interval touching the threshold counted as broken")
	}
	for _, bad := range [][]Level{nil, {{math.NaN(), ret(1)}}, {{1, stats.Estimate{Value: math.NaN()}}}} {
		if _, err := BreakingPoint(bad, 0); err == nil {
			t.Errorf("BreakingPoint(%v) gave no error", bad)
		}
	}
	if _, err := BreakingPoint(levels, -1); err == nil {
		t.Error("negative threshold accepted")
	}
}

func TestDriftBreak(t *testing.T) {
	est := func(lo, hi float64) stats.Estimate { return stats.Estimate{Value: (lo + hi) / 2, Lo: lo, Hi: hi} }
	levels := []DriftLevel{{0.6, est(0.3, 0.5)}, {0, est(0, 0)}, {0.2, est(0.05, 0.15)}, {0.4, est(0.09, 0.3)}}
	br, err := DriftBreak(levels, 0.1)
	if err != nil || !br.Reached || br.Severity != 0.6 || br.Max != 0.6 || br.Min != 0 {
		t.Errorf("break %+v %v, want at 0.6 (0.4's interval reaches below 0.1)", br, err)
	}
	br, _ = DriftBreak(levels[:3:3][1:], 0.1)
	if br.Reached {
		t.Errorf("break %+v, want not reached", br)
	}
	if _, err := DriftBreak(levels, 0); err != nil {
		t.Errorf("threshold 0 (the default): %v", err)
	}
	if _, err := DriftBreak(nil, 0.1); err == nil {
		t.Error("no levels: no error")
	}
}

package breakpoint_test

import (
	"fmt"

	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
)

func ExampleBreakingPoint() {
	levels := []breakpoint.Level{
		{Severity: 0.1, Retention: stats.Estimate{Value: 0.95, Lo: 0.88, Hi: 1.01}},
		{Severity: 0.3, Retention: stats.Estimate{Value: 0.71, Lo: 0.6, Hi: 0.8}},
		{Severity: 0.5, Retention: stats.Estimate{Value: 0.42, Lo: 0.3, Hi: 0.55}},
		{Severity: 0.7, Retention: stats.Estimate{Value: 0.18, Lo: 0.1, Hi: 0.27}},
	}
	b, _ := breakpoint.BreakingPoint(levels, 0) // default threshold 0.5
	fmt.Println(b, "first dip", b.DipString())
	b, _ = breakpoint.BreakingPoint(levels, 0.1)
	fmt.Println(b)
	// Output:
	// 0.7 first dip 0.5
	// not reached (≤ 0.7)
}

package choose

import (
	"math"
	"slices"
)

// Point is a (cost, score) pair: lower cost and higher score are better.
type Point struct {
	Cost, Score float64
}

// ParetoFront returns the indices of the points no other point dominates,
// in ascending cost. A point dominates another when its cost is no higher
// and its score no lower, and one of the two is strictly better. Of
// identical points only the first is kept. Points with a NaN coordinate
// are left out.
//
// Example: (1, 5), (2, 4), (3, 7), (4, 7), (5, 9) → indices 0, 2, 4.
func ParetoFront(pts []Point) []int {
	idx := make([]int, 0, len(pts))
	for i, p := range pts {
		if !math.IsNaN(p.Cost) && !math.IsNaN(p.Score) {
			idx = append(idx, i)
		}
	}
	// Ascending cost, then descending score, then index.
	slices.SortStableFunc(idx, func(a, b int) int {
		pa, pb := pts[a], pts[b]
		switch {
		case pa.Cost < pb.Cost:
			return -1
		case pa.Cost > pb.Cost:
			return 1
		case pa.Score > pb.Score:
			return -1
		case pa.Score < pb.Score:
			return 1
		}
		return a - b
	})
	front := idx[:0]
	best := math.Inf(-1)
	for _, i := range idx {
		if pts[i].Score > best {
			front = append(front, i)
			best = pts[i].Score
		}
	}
	return slices.Clone(front)
}

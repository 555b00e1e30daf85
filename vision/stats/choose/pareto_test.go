package choose

import (
	"math"
	"slices"
	"testing"

	"tilebench/internal/seeds"
)

// Worked example, by hand: (1,5) (2,4) (3,7) (4,7) (5,9) (3,7 again)
// (2.5,NaN). (2,4) is dominated by (1,5); (4,7) by (3,7); the repeated
// (3,7) by its first copy; the NaN point is left out.
func TestParetoFrontWorked(t *testing.T) {
	pts := []Point{{1, 5}, {2, 4}, {3, 7}, {4, 7}, {5, 9}, {3, 7}, {2.5, math.NaN()}}
	if got, want := ParetoFront(pts), []int{0, 2, 4}; !slices.Equal(got, want) {
		t.Fatalf("front %v, want %v", got, want)
	}
	// Same cost, higher score wins whatever the order.
	if got := ParetoFront([]Point{{2, 1}, {2, 3}, {1, 0}}); !slices.Equal(got, []int{2, 1}) {
		t.Fatalf("front %v, want [2 1]", got)
	}
	if got := ParetoFront(nil); len(got) != 0 {
		t.Fatalf("front of nothing: %v", got)
	}
}

// Brute-force check of the definition on random point sets.
func TestParetoFrontDefinition(t *testing.T) {
	r := seeds.NewRand(3)
	for trial := 0; trial < 200; trial++ {
		pts := make([]Point, 1+r.IntN(12))
		for i := range pts {
			pts[i] = Point{float64(r.IntN(6)), float64(r.IntN(6))}
		}
		front := ParetoFront(pts)
		for i, p := range pts {
			dominated, dupBefore := false, false
			for j, q := range pts {
				if q.Cost <= p.Cost && q.Score >= p.Score && (q.Cost < p.Cost || q.Score > p.Score) {
					dominated = true
				}
				if j < i && q == p {
					dupBefore = true
				}
			}
			if in := slices.Contains(front, i); in == (dominated || dupBefore) {
				t.Fatalf("%v: point %d %v in front = %v, dominated %v", pts, i, p, in, dominated)
			}
		}
	}
}

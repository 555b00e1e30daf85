package stats

import (
	"cmp"
	"math/rand/v2"
	"slices"
)

// sampler draws stratified resamples as counts over the sorted pooled
// data instead of as values, so that the statistics of a resample come
// from one linear walk, without sorting (O(n) per resample instead of
// O(n log n)). The draws are the same as drawing values: stratum k of size
// m contributes m indices r.IntN(m), in stratum order.
type sampler struct {
	sorted []float64 // pooled scores, ascending
	rank   [][]int   // rank[k][j]: position of s[k][j] in sorted
	count  []int32   // multiplicity of each sorted position in a resample
}

func newSampler(s Strata) *sampler {
	n := s.N()
	type item struct {
		v    float64
		k, j int
	}
	items := make([]item, 0, n)
	for k, x := range s {
		for j, v := range x {
			items = append(items, item{v, k, j})
		}
	}
	slices.SortStableFunc(items, func(a, b item) int { return cmp.Compare(a.v, b.v) })
	sp := &sampler{sorted: make([]float64, n), rank: make([][]int, len(s)), count: make([]int32, n)}
	flat := make([]int, n)
	o := 0
	for k, x := range s {
		sp.rank[k] = flat[o : o+len(x) : o+len(x)]
		o += len(x)
	}
	for i, it := range items {
		sp.sorted[i] = it.v
		sp.rank[it.k][it.j] = i
	}
	return sp
}

// draw fills count with one stratified resample.
func (sp *sampler) draw(r *rand.Rand) {
	clear(sp.count)
	for _, rk := range sp.rank {
		m := len(rk)
		for j := 0; j < m; j++ {
			sp.count[rk[r.IntN(m)]]++
		}
	}
}

// full sets count to the data itself (every score once).
func (sp *sampler) full() {
	for i := range sp.count {
		sp.count[i] = 1
	}
}

// sumRange returns the sum of the resample's order statistics at
// positions [lo, hi) (0-based, ascending).
func (sp *sampler) sumRange(lo, hi int) float64 {
	var s float64
	cum := 0
	for i, c := range sp.count {
		if c == 0 {
			continue
		}
		a, b := max(cum, lo), min(cum+int(c), hi)
		if b > a {
			s += float64(b-a) * sp.sorted[i]
		}
		cum += int(c)
		if cum >= hi {
			break
		}
	}
	return s
}

// at returns the resample's order statistic at position p.
func (sp *sampler) at(p int) float64 {
	cum := 0
	for i, c := range sp.count {
		cum += int(c)
		if p < cum {
			return sp.sorted[i]
		}
	}
	return sp.sorted[len(sp.sorted)-1]
}

func (sp *sampler) mean() float64 {
	n := len(sp.sorted)
	return sp.sumRange(0, n) / float64(n)
}

func (sp *sampler) median() float64 {
	n := len(sp.sorted)
	if n%2 == 1 {
		return sp.at(n / 2)
	}
	return (sp.at(n/2-1) + sp.at(n/2)) / 2
}

// iqm follows iqmSorted: drop floor(n/4) at each end.
func (sp *sampler) iqm() float64 {
	n := len(sp.sorted)
	k := n / 4
	return sp.sumRange(k, n-k) / float64(n-2*k)
}

func (sp *sampler) stat(st Statistic) float64 {
	switch st {
	case StatMean:
		return sp.mean()
	case StatMedian:
		return sp.median()
	default:
		return sp.iqm()
	}
}

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

// piSampler draws the stratified resamples of ProbImprovementCI as counts,
// like sampler, and computes P(X > Y) from them in linear time: for the
// k-th stratum pair, below[i] and upTo[i] say how many sorted y lie
// strictly below and at or below the i-th sorted x, so one prefix sum over
// the y counts gives every x its wins.
type piSampler struct {
	strata []piStratum
}

type piStratum struct {
	xr, yr      []int   // original index → sorted position
	below, upTo []int   // per sorted x: sorted ys below / at or below it
	cx, cy      []int32 // resample counts per sorted position
	pre         []int64 // prefix sums of cy, len(cy)+1
}

func newPISampler(x, y Strata) *piSampler {
	ps := &piSampler{strata: make([]piStratum, len(x))}
	for k := range x {
		xs, xr := sortRanks(x[k])
		ys, yr := sortRanks(y[k])
		st := piStratum{xr: xr, yr: yr, below: make([]int, len(xs)), upTo: make([]int, len(xs)),
			cx: make([]int32, len(xs)), cy: make([]int32, len(ys)), pre: make([]int64, len(ys)+1)}
		lo, hi := 0, 0
		for i, v := range xs {
			for lo < len(ys) && ys[lo] < v {
				lo++
			}
			hi = max(hi, lo)
			for hi < len(ys) && ys[hi] <= v {
				hi++
			}
			st.below[i], st.upTo[i] = lo, hi
		}
		ps.strata[k] = st
	}
	return ps
}

// sortRanks returns x sorted and, for each original index, its sorted
// position.
func sortRanks(x []float64) ([]float64, []int) {
	idx := make([]int, len(x))
	for i := range idx {
		idx[i] = i
	}
	slices.SortStableFunc(idx, func(a, b int) int { return cmp.Compare(x[a], x[b]) })
	sorted, rank := make([]float64, len(x)), make([]int, len(x))
	for p, i := range idx {
		sorted[p], rank[i] = x[i], p
	}
	return sorted, rank
}

// draw makes one resample: every x stratum, then every y stratum (the
// order in which resample would draw them as values).
func (ps *piSampler) draw(r *rand.Rand) {
	for k := range ps.strata {
		st := &ps.strata[k]
		clear(st.cx)
		m := len(st.xr)
		for j := 0; j < m; j++ {
			st.cx[st.xr[r.IntN(m)]]++
		}
	}
	for k := range ps.strata {
		st := &ps.strata[k]
		clear(st.cy)
		n := len(st.yr)
		for j := 0; j < n; j++ {
			st.cy[st.yr[r.IntN(n)]]++
		}
	}
}

// full sets the counts to the data itself.
func (ps *piSampler) full() {
	for k := range ps.strata {
		st := &ps.strata[k]
		for i := range st.cx {
			st.cx[i] = 1
		}
		for i := range st.cy {
			st.cy[i] = 1
		}
	}
}

// pi returns the stratum-averaged P(X > Y) of the current counts.
func (ps *piSampler) pi() float64 {
	var total float64
	for k := range ps.strata {
		st := &ps.strata[k]
		for i, c := range st.cy {
			st.pre[i+1] = st.pre[i] + int64(c)
		}
		var twice int64 // 2·wins, exact in integers
		for i, c := range st.cx {
			if c == 0 {
				continue
			}
			lt, le := st.pre[st.below[i]], st.pre[st.upTo[i]]
			twice += int64(c) * (lt + le)
		}
		total += float64(twice) / (2 * float64(len(st.cx)) * float64(len(st.cy)))
	}
	return total / float64(len(ps.strata))
}

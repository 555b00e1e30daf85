package train

import "sort"

// CentredRanks writes into dst the centred-rank transform of fitness
// (Salimans et al. 2017, §2.2 and their released code): each value is
// replaced by its rank among all values (0 for the lowest), divided by
// n−1 and shifted by −0.5, so the results lie in [−0.5, 0.5] and sum to
// zero. Tied values share the mean of their ranks (the published code
// breaks ties by sort order instead; sharing keeps the result independent
// of the order of the inputs). dst and fitness have the same length; idx
// is scratch of that length (nil allocates).
func CentredRanks(dst, fitness []float64, idx []int) {
	n := len(fitness)
	if len(dst) != n {
		panic("train: CentredRanks length mismatch")
	}
	if n == 1 {
		dst[0] = 0
		return
	}
	if len(idx) != n {
		idx = make([]int, n)
	}
	for i := range idx {
		idx[i] = i
	}
	sort.SliceStable(idx, func(a, b int) bool { return fitness[idx[a]] < fitness[idx[b]] })
	for i := 0; i < n; {
		j := i
		for j+1 < n && fitness[idx[j+1]] == fitness[idx[i]] {
			j++
		}
		r := float64(i+j) / 2
		for k := i; k <= j; k++ {
			dst[idx[k]] = r/float64(n-1) - 0.5
		}
		i = j + 1
	}
}

//go:build amd64 && !purego

package patch

// axpyPairAVX and scaleAVX are in corrupt_amd64.s.
//
//go:noescape
func axpyPairAVX(d, a, b *float32, n int, k float32)

//go:noescape
func scaleAVX(d, c *float32, n int, k float32)

// axpyPair sets d[i] += k·(a[i] + b[i]); a and b are at least as long as
// d. With AVX2 the multiples of 8 run in assembly, bit for bit the same.
func axpyPair(d, a, b []float32, k float32) {
	a, b = a[:len(d)], b[:len(d)]
	done := 0
	if haveSIMD && len(d) >= 8 {
		done = len(d) &^ 7
		axpyPairAVX(&d[0], &a[0], &b[0], done, k)
	}
	axpyPairGo(d[done:], a[done:], b[done:], k)
}

// scaleInto sets d[i] = k·c[i]; c is at least as long as d.
func scaleInto(d, c []float32, k float32) {
	c = c[:len(d)]
	done := 0
	if haveSIMD && len(d) >= 8 {
		done = len(d) &^ 7
		scaleAVX(&d[0], &c[0], done, k)
	}
	scaleIntoGo(d[done:], c[done:], k)
}

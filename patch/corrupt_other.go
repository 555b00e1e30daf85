//go:build !amd64 || purego

package patch

// axpyPair sets d[i] += k·(a[i] + b[i]); a and b are at least as long as d.
func axpyPair(d, a, b []float32, k float32) { axpyPairGo(d, a, b, k) }

// scaleInto sets d[i] = k·c[i]; c is at least as long as d.
func scaleInto(d, c []float32, k float32) { scaleIntoGo(d, c, k) }

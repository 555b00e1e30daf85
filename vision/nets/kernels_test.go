package nets

import (
	"bytes"
	"math"
	"os"
	"testing"

	"tilebench/vision/nets/internal/asmgen"
)

// The kernels in use (blocked or assembly) against the plain loops, on
// shapes that exercise every remainder of the unrolled and blocked loops
// and leading dimensions larger than the row length.
func TestKernelsMatchPlain(t *testing.T) {
	rng := testRand(1)
	shapes := [][3]int{{1, 1, 1}, {3, 5, 7}, {6, 16, 16}, {7, 192, 16}, {13, 33, 32}, {144, 192, 16}, {16, 144, 16}, {5, 9, 35}, {2, 3, 40}}
	for _, sh := range shapes {
		m, k, n := sh[0], sh[1], sh[2]
		for _, op := range []string{"nn", "nt", "tn"} {
			var ar, ac, br, bc int
			switch op {
			case "nn":
				ar, ac, br, bc = m, k, k, n
			case "nt":
				ar, ac, br, bc = m, k, n, k
			case "tn":
				ar, ac, br, bc = k, m, k, n
			}
			lda, ldb, ldc := ac+2, bc+1, n+3
			a := randSlice(rng, ar*lda, 1)
			b := randSlice(rng, br*ldb, 1)
			c0 := randSlice(rng, m*ldc, 1)
			want := append([]float32(nil), c0...)
			got := append([]float32(nil), c0...)
			var scratch []float32
			pick := func(ks kernels) func(int, int, int, []float32, int, []float32, int, []float32, int) {
				nt := func(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
					ks.nt(&scratch, m, k, n, a, lda, b, ldb, c, ldc)
				}
				return map[string]func(int, int, int, []float32, int, []float32, int, []float32, int){"nn": ks.nn, "nt": nt, "tn": ks.tn}[op]
			}
			pick(plainKernels)(m, k, n, a, lda, b, ldb, want, ldc)
			pick(kern)(m, k, n, a, lda, b, ldb, got, ldc)
			for i := range want {
				// Each entry sums k products of values in ±1: a different
				// summation order changes it by at most k·2^-24·Σ|terms|.
				if math.Abs(float64(want[i]-got[i])) > 1e-6*float64(k+1) {
					t.Fatalf("%s %dx%dx%d: entry %d = %v, plain %v", op, m, k, n, i, got[i], want[i])
				}
			}
			// Padding between rows must be untouched.
			for i := 0; i < m; i++ {
				for j := n; j < ldc && i*ldc+j < len(got); j++ {
					if got[i*ldc+j] != c0[i*ldc+j] {
						t.Fatalf("%s %dx%dx%d wrote outside the matrix at row %d col %d", op, m, k, n, i, j)
					}
				}
			}
		}
	}
}

// The committed assembly is what the generator in internal/asmgen writes.
func TestAssemblyUpToDate(t *testing.T) {
	got, err := os.ReadFile("kernels_amd64.s")
	if err != nil {
		t.Fatal(err)
	}
	if want := asmgen.Generate(); !bytes.Equal(got, want) {
		t.Error("kernels_amd64.s differs from the output of internal/asmgen: run go generate in vision/nets")
	}
}

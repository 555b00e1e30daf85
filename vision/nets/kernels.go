package nets

// Matrix kernels. Every matrix product of every layer goes through one of
// the three functions in the table kern, so that the fast kernels, the
// plain reference kernels and the instrumented (counting) kernels can be
// swapped for tests. Matrices are row-major with explicit leading
// dimensions; every kernel accumulates into C (callers initialise C with
// zeros or a bias). A product of an m×k by a k×n matrix performs m·k·n
// multiply-adds, 2·m·k·n flops (Golub & Van Loan, Matrix Computations,
// §1.1).
type kernels struct {
	// nn: C (m×n) += A (m×k) · B (k×n).
	nn func(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int)
	// nt: C (m×n) += A (m×k) · Bᵀ, B stored n×k. A kernel that needs a
	// transposed copy of B keeps it in *scratch (owned by the calling
	// layer, so that nets on different goroutines share nothing).
	nt func(scratch *[]float32, m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int)
	// tn: C (m×n) += Aᵀ · B, A stored k×m, B k×n.
	tn func(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int)
}

// plainKernels are the straightforward loops every faster kernel is
// compared against.
var plainKernels = kernels{nn: nnPlain, nt: ntPlain, tn: tnPlain}

// kern is the kernel table in use; fastKernels where the machine has them.
var kern = fastKernels()

func nnPlain(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for i := 0; i < m; i++ {
		crow := c[i*ldc : i*ldc+n]
		arow := a[i*lda : i*lda+k]
		for p, av := range arow {
			brow := b[p*ldb : p*ldb+n]
			for j, bv := range brow {
				crow[j] += av * bv
			}
		}
	}
}

func ntPlain(_ *[]float32, m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for i := 0; i < m; i++ {
		arow := a[i*lda : i*lda+k]
		crow := c[i*ldc : i*ldc+n]
		for j := range crow {
			brow := b[j*ldb : j*ldb+k]
			var s float32
			for p, av := range arow {
				s += av * brow[p]
			}
			crow[j] += s
		}
	}
}

func tnPlain(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for p := 0; p < k; p++ {
		arow := a[p*lda : p*lda+m]
		brow := b[p*ldb : p*ldb+n]
		for i, av := range arow {
			if av == 0 {
				continue
			}
			crow := c[i*ldc : i*ldc+n]
			for j, bv := range brow {
				crow[j] += av * bv
			}
		}
	}
}

// dot4 is a dot product with four independent accumulators.
func dot4(a, b []float32) float32 {
	b = b[:len(a)]
	var s0, s1, s2, s3 float32
	i := 0
	for ; i+4 <= len(a); i += 4 {
		s0 += a[i] * b[i]
		s1 += a[i+1] * b[i+1]
		s2 += a[i+2] * b[i+2]
		s3 += a[i+3] * b[i+3]
	}
	for ; i < len(a); i++ {
		s0 += a[i] * b[i]
	}
	return (s0 + s1) + (s2 + s3)
}

// axpy adds s·x to y.
func axpy(s float32, x, y []float32) {
	y = y[:len(x)]
	i := 0
	for ; i+4 <= len(x); i += 4 {
		y[i] += s * x[i]
		y[i+1] += s * x[i+1]
		y[i+2] += s * x[i+2]
		y[i+3] += s * x[i+3]
	}
	for ; i < len(x); i++ {
		y[i] += s * x[i]
	}
}

// Blocked plain-Go kernels: unrolled inner loops, same results as the
// plain ones up to float32 rounding order.
func nnBlocked(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for i := 0; i < m; i++ {
		crow := c[i*ldc : i*ldc+n]
		arow := a[i*lda : i*lda+k]
		for p, av := range arow {
			axpy(av, b[p*ldb:p*ldb+n], crow)
		}
	}
}

func ntBlocked(_ *[]float32, m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for i := 0; i < m; i++ {
		arow := a[i*lda : i*lda+k]
		crow := c[i*ldc : i*ldc+n]
		for j := range crow {
			crow[j] += dot4(arow, b[j*ldb:j*ldb+k])
		}
	}
}

func tnBlocked(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	for p := 0; p < k; p++ {
		arow := a[p*lda : p*lda+m]
		brow := b[p*ldb : p*ldb+n]
		for i, av := range arow {
			if av != 0 {
				axpy(av, brow, c[i*ldc:i*ldc+n])
			}
		}
	}
}

// countingKernels returns plain kernels that add one to *macs for every
// multiply-add they perform: the instrumented forward pass that the cost
// model's FLOP counts are checked against.
func countingKernels(macs *int64) kernels {
	return kernels{
		nn: func(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
			for i := 0; i < m; i++ {
				for p := 0; p < k; p++ {
					for j := 0; j < n; j++ {
						c[i*ldc+j] += a[i*lda+p] * b[p*ldb+j]
						*macs++
					}
				}
			}
		},
		nt: func(_ *[]float32, m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
			for i := 0; i < m; i++ {
				for j := 0; j < n; j++ {
					for p := 0; p < k; p++ {
						c[i*ldc+j] += a[i*lda+p] * b[j*ldb+p]
						*macs++
					}
				}
			}
		},
		tn: func(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
			for p := 0; p < k; p++ {
				for i := 0; i < m; i++ {
					for j := 0; j < n; j++ {
						c[i*ldc+j] += a[p*lda+i] * b[p*ldb+j]
						*macs++
					}
				}
			}
		},
	}
}

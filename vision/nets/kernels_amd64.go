//go:build amd64 && !purego

package nets

//go:generate go run ./internal/asmgen/cmd/asmgen -o kernels_amd64.s

import (
	"math"

	"golang.org/x/sys/cpu"
)

// Assembly micro-kernels (kernels_amd64.s, written by internal/asmgen):
// gemmRxW computes C (R×W) += A (R×k) · B (k×W) with AVX and FMA, where
// A[r][p] is at a + r·lda + p·inc: inc = 1 reads A, lda = 1 reads Aᵀ.
// Strides are in elements.

//go:noescape
func gemm1x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm2x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm3x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm4x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm5x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm6x16(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm1x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm2x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm3x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm4x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm5x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

//go:noescape
func gemm6x8(k int, a *float32, lda, inc int, b *float32, ldb int, c *float32, ldc int)

// expSub8 replaces each of the n values at x (n a multiple of 8) by
// e^(x−m), with the steps and coefficients of expf, and returns their sum.
//
//go:noescape
func expSub8(x *float32, n int, m float32) float32

// max8 returns the largest of the n values at x (n a positive multiple
// of 8).
//
//go:noescape
func max8(x *float32, n int) float32

// sub8 sets dst[i] = src[i] − m[i] for the n values at each (n a
// positive multiple of 8).
//
//go:noescape
func sub8(dst, src, m *float32, n int)

// zero8 reports whether every bit of the n values at x is zero (n a
// positive multiple of 8).
//
//go:noescape
func zero8(x *float32, n int) bool

// tanh8 sets dst[i] = tanhf(src[i]), bit for bit, for the n values at
// each (n a positive multiple of 8).
//
//go:noescape
func tanh8(dst, src *float32, n int)

// haveAVX reports whether the assembly kernels can run here.
var haveAVX = cpu.X86.HasAVX && cpu.X86.HasFMA && cpu.X86.HasSSE41

func fastKernels() kernels {
	if !haveAVX {
		return kernels{nn: nnBlocked, nt: ntBlocked, tn: tnBlocked}
	}
	return kernels{nn: nnAVX, nt: ntAVX, tn: tnAVX}
}

// nnAVX is C += A·B through the micro-kernels.
func nnAVX(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	if m <= 0 || n <= 0 || k <= 0 {
		return
	}
	// One bounds check for everything the kernels will touch.
	_ = a[(m-1)*lda+k-1]
	_ = b[(k-1)*ldb+n-1]
	_ = c[(m-1)*ldc+n-1]
	blocks(m, k, n, a, lda, 1, b, ldb, c, ldc)
}

// tnAVX is C += Aᵀ·B (A stored k×m) through the same micro-kernels,
// reading A down its columns.
func tnAVX(m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	if m <= 0 || n <= 0 || k <= 0 {
		return
	}
	_ = a[(k-1)*lda+m-1]
	_ = b[(k-1)*ldb+n-1]
	_ = c[(m-1)*ldc+n-1]
	blocks(m, k, n, a, 1, lda, b, ldb, c, ldc)
}

// ntAVX is C += A·Bᵀ (B stored n×k): B is transposed into *scratch
// so that the product runs in the micro-kernels. For fewer than 4 rows the
// transposition costs more than it saves, and the blocked Go loop runs.
func ntAVX(scratch *[]float32, m, k, n int, a []float32, lda int, b []float32, ldb int, c []float32, ldc int) {
	if m < 4 || n < 8 {
		ntBlocked(scratch, m, k, n, a, lda, b, ldb, c, ldc)
		return
	}
	if k <= 0 {
		return
	}
	_ = b[(n-1)*ldb+k-1]
	bt := grow(*scratch, k*n)
	*scratch = bt
	for j := 0; j < n; j++ {
		row := b[j*ldb : j*ldb+k]
		for p, v := range row {
			bt[p*n+j] = v
		}
	}
	nnAVX(m, k, n, a, lda, bt, n, c, ldc)
}

// blocks covers C with column blocks of 16, then 8, each in row blocks of
// up to 6, and does the last n mod 8 columns in Go. A[i][p] is
// a[i·ra + p·pa]. The callers have checked every index.
func blocks(m, k, n int, a []float32, ra, pa int, b []float32, ldb int, c []float32, ldc int) {
	j := 0
	for ; j+16 <= n; j += 16 {
		for i := 0; i < m; i += 6 {
			ap, bp, cp := &a[i*ra], &b[j], &c[i*ldc+j]
			switch min(6, m-i) {
			case 6:
				gemm6x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 5:
				gemm5x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 4:
				gemm4x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 3:
				gemm3x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 2:
				gemm2x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 1:
				gemm1x16(k, ap, ra, pa, bp, ldb, cp, ldc)
			}
		}
	}
	for ; j+8 <= n; j += 8 {
		for i := 0; i < m; i += 6 {
			ap, bp, cp := &a[i*ra], &b[j], &c[i*ldc+j]
			switch min(6, m-i) {
			case 6:
				gemm6x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 5:
				gemm5x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 4:
				gemm4x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 3:
				gemm3x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 2:
				gemm2x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			case 1:
				gemm1x8(k, ap, ra, pa, bp, ldb, cp, ldc)
			}
		}
	}
	if j < n {
		for i := 0; i < m; i++ {
			crow := c[i*ldc+j : i*ldc+n]
			for p := 0; p < k; p++ {
				av := a[i*ra+p*pa]
				brow := b[p*ldb+j : p*ldb+n]
				for q, bv := range brow {
					crow[q] += av * bv
				}
			}
		}
	}
}

// expSubRow sets row[i] = e^(row[i]−m) and returns the sum.
func expSubRow(row []float32, m float32) float32 {
	if !haveAVX || len(row) < 8 {
		return expSubRowGo(row, m)
	}
	n8 := len(row) &^ 7
	s := expSub8(&row[0], n8, m)
	return s + expSubRowGo(row[n8:], m)
}

// maxRow returns the largest value of a non-empty row.
func maxRow(row []float32) float32 {
	if !haveAVX || len(row) < 8 {
		return maxRowGo(row)
	}
	n8 := len(row) &^ 7
	mx := max8(&row[0], n8)
	if n8 < len(row) {
		mx = max(mx, maxRowGo(row[n8:]))
	}
	return mx
}

// subRow sets dst[i] = src[i] − m[i] (the three of equal length).
func subRow(dst, src, m []float32) {
	if !haveAVX || len(dst) < 8 {
		subRowGo(dst, src, m)
		return
	}
	n8 := len(dst) &^ 7
	_, _ = src[len(dst)-1], m[len(dst)-1]
	sub8(&dst[0], &src[0], &m[0], n8)
	subRowGo(dst[n8:], src[n8:], m[n8:])
}

// blankRow reports whether every value of row has all bits zero (a −0
// counts as not blank).
func blankRow(row []float32) bool {
	if !haveAVX || len(row) < 8 {
		return blankRowGo(row)
	}
	if math.Float32bits(row[0])|math.Float32bits(row[len(row)-1]) != 0 {
		return false // most rows that are not blank end here
	}
	n8 := len(row) &^ 7
	return zero8(&row[0], n8) && blankRowGo(row[n8:])
}

// tanhRow sets dst[i] = tanhf(src[i]) (dst as long as src).
func tanhRow(dst, src []float32) {
	if !haveAVX || len(src) < 8 {
		tanhRowGo(dst, src)
		return
	}
	n8 := len(src) &^ 7
	_ = dst[len(src)-1]
	tanh8(&dst[0], &src[0], n8)
	tanhRowGo(dst[n8:], src[n8:])
}

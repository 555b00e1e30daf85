//go:build !amd64 || purego

package nets

func fastKernels() kernels { return kernels{nn: nnBlocked, nt: ntBlocked, tn: tnBlocked} }

// expSubRow sets row[i] = e^(row[i]−m) and returns the sum.
func expSubRow(row []float32, m float32) float32 { return expSubRowGo(row, m) }

// maxRow returns the largest value of a non-empty row.
func maxRow(row []float32) float32 { return maxRowGo(row) }

// subRow sets dst[i] = src[i] − m[i] (the three of equal length).
func subRow(dst, src, m []float32) { subRowGo(dst, src, m) }

// blankRow reports whether every value of row has all bits zero (a −0
// counts as not blank).
func blankRow(row []float32) bool { return blankRowGo(row) }

// tanhRow sets dst[i] = tanhf(src[i]) (dst as long as src).
func tanhRow(dst, src []float32) { tanhRowGo(dst, src) }

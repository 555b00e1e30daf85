//go:build !amd64 || purego

package nets

func fastKernels() kernels { return kernels{nn: nnBlocked, nt: ntBlocked, tn: tnBlocked} }

// expSubRow sets row[i] = e^(row[i]−m) and returns the sum.
func expSubRow(row []float32, m float32) float32 { return expSubRowGo(row, m) }

// maxRow returns the largest value of a non-empty row.
func maxRow(row []float32) float32 { return maxRowGo(row) }

//go:build amd64 && !purego

package patch

import "golang.org/x/sys/cpu"

// haveSIMD says whether rgbaCellsAVX2 may run: the CPU has AVX2 and FMA.
// Tests switch it off to check the portable path.
var haveSIMD = cpu.X86.HasAVX2 && cpu.X86.HasFMA

// haveAVX512 says whether rgbaFrame8AVX512 may run (with haveSIMD): the
// CPU and OS support AVX-512 F and VBMI. Tests switch it off to check the
// AVX2 frame path.
var haveAVX512 = cpu.X86.HasAVX512F && cpu.X86.HasAVX512VBMI

// rgbaCellsAVX2 is in fastrgba_amd64.s.
//
//go:noescape
func rgbaCellsAVX2(dst *float32, src *byte, cells, groups, srcCell, dstCell int)

// rgbaCellsSIMD converts the first 4·⌊pw/4⌋ pixels of each cell's row
// with AVX2 and reports how many pixels of each cell it did (0 when it
// cannot run).
func rgbaCellsSIMD(dst []float32, p []byte, cells, pw, D int) int {
	groups := pw / 4
	if !haveSIMD || groups == 0 {
		return 0
	}
	rgbaCellsAVX2(&dst[0], &p[0], cells, groups, 4*pw, 4*D)
	return 4 * groups
}

// rgbaFrame8AVX2 is in fastrgba_amd64.s.
//
//go:noescape
func rgbaFrame8AVX2(dst *float32, src *byte, rows, cells, groups, srcStride, srcCell, dstCell, ph, rowBytes, gridRowBytes int)

// rgbaFrame8AVX512 is in fastrgba_amd64.s.
//
//go:noescape
func rgbaFrame8AVX512(dst *float32, src *byte, rows, pairs, srcStride, dstCell, ph, rowBytes, gridRowBytes int)

// rgbaFrameSIMD converts, in one call, the whole cells (the first cells
// of every grid row) of the first rows frame rows, for a grid whose
// strides equal its patch size and whose patch width is a multiple of 8.
// With AVX-512, patch width 8 and an even number of cells it takes two
// cells a step. It reports whether it ran.
func rgbaFrameSIMD(g *Grid, src *pixSource, data []float32, rows, cells int) bool {
	pw, ph, D := g.PatchW, g.PatchH, g.D()
	if !haveSIMD || pw%8 != 0 || g.StrideX != pw || g.StrideY != ph || rows <= 0 || cells <= 0 {
		return false
	}
	// Bounds, as the assembly does not check: the last value written and
	// the last byte read.
	last := ((rows-1)/ph)*g.Cols*D + ((rows-1)%ph)*3*pw + (cells-1)*D + 3*pw
	read := (rows-1)*src.stride + 4*pw*cells
	if last > len(data) || read > len(src.pix) {
		return false
	}
	if haveAVX512 && pw == 8 && cells%2 == 0 {
		rgbaFrame8AVX512(&data[0], &src.pix[0], rows, cells/2, src.stride, 4*D, ph, 4*3*pw, 4*g.Cols*D)
		return true
	}
	rgbaFrame8AVX2(&data[0], &src.pix[0], rows, cells, pw/8, src.stride, 4*pw, 4*D, ph, 4*3*pw, 4*g.Cols*D)
	return true
}

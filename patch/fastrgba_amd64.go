//go:build amd64 && !purego

package patch

import "golang.org/x/sys/cpu"

// haveSIMD says whether rgbaCellsAVX2 may run: the CPU has AVX2. Tests
// switch it off to check the portable path.
var haveSIMD = cpu.X86.HasAVX2

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

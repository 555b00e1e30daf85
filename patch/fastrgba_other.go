//go:build !amd64 || purego

package patch

// haveSIMD is false where there is no assembly path.
var haveSIMD = false

// rgbaCellsSIMD does nothing without an assembly path.
func rgbaCellsSIMD(dst []float32, p []byte, cells, pw, D int) int { return 0 }

// rgbaFrameSIMD does nothing without an assembly path.
func rgbaFrameSIMD(g *Grid, src *pixSource, data []float32, rows, cells int) bool { return false }

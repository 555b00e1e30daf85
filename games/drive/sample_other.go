//go:build !amd64 || purego

package drive

// haveGather and haveGather512 are false where there is no assembly
// path.
var haveGather, haveGather512 = false, false

// sampleInsideSIMD does nothing without an assembly path.
func sampleInsideSIMD(pix []uint32, ww int, out []byte, outStride, W, H int, st sampling) int {
	return 0
}

//go:build amd64 && !purego

package drive

import (
	"unsafe"

	"golang.org/x/sys/cpu"
)

// haveGather says whether the AVX2 gather sampler may run, haveGather512
// whether the AVX-512 one (sixteen samples a step instead of eight) may.
// Tests switch them off to check the other paths.
var (
	haveGather    = cpu.X86.HasAVX2
	haveGather512 = haveGather && cpu.X86.HasAVX512F && cpu.X86.HasAVX512BW
)

// gatherSetup is what the assembly reads: the fixed-point positions of
// the first samples of frame row 0 (the AVX2 sampler reads eight, the
// AVX-512 one sixteen), the steps per group of that many columns and per
// row, and the multipliers (1, world width) that turn a lane holding x and
// y as its low and high 16 bits into the pixel index x + y·width with one
// multiply-add of 16-bit halves.
type gatherSetup struct {
	u, v     [16]int32
	du, dv   int32
	dur, dvr int32
	mul      int32
}

// sampleGather8 and sampleGather16 are in sample_amd64.s. Each samples
// rows frame rows of groups groups of 8 or 16 pixels.
//
//go:noescape
func sampleGather8(out *byte, pix *uint32, outStride, rows, groups int, set *gatherSetup)

//go:noescape
func sampleGather16(out *byte, pix *uint32, outStride, rows, groups int, set *gatherSetup)

// sampleInsideSIMD samples the first columns of every row, as many as
// whole groups of 8 (AVX2) or 16 (AVX-512) fill, with gathers, and
// reports how many columns it did (0 when it cannot run). The caller's
// guarantees are sampleInside's: every sample falls inside the world
// image, so each coordinate's whole part is below 2¹⁵ and fits a 16-bit
// half; the world's width must fit one too.
func sampleInsideSIMD(pix []uint32, ww int, out []byte, outStride, W, H int, st sampling) int {
	lanes := 8
	if haveGather512 {
		lanes = 16
	}
	groups := W / lanes
	if !haveGather || groups == 0 || H <= 0 || ww >= 1<<15 {
		return 0
	}
	var set gatherSetup
	for k := range int32(lanes) {
		set.u[k] = st.u + k*st.duc
		set.v[k] = st.v + k*st.dvc
	}
	set.du, set.dv = int32(lanes)*st.duc, int32(lanes)*st.dvc
	set.dur, set.dvr = st.dur, st.dvr
	set.mul = int32(ww)<<16 | 1
	if lanes == 16 {
		sampleGather16(unsafe.SliceData(out), unsafe.SliceData(pix), outStride, H, groups, &set)
	} else {
		sampleGather8(unsafe.SliceData(out), unsafe.SliceData(pix), outStride, H, groups, &set)
	}
	return lanes * groups
}

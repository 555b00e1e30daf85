package drive

import (
	"encoding/binary"
	"math"
	"unsafe"
)

// sampling is the fixed-point (16.16) world-pixel position of frame
// pixel (0,0) and its steps per frame column and per frame row.
type sampling struct {
	u, v, duc, dvc, dur, dvr int32
}

func fix16(x float64) int32 { return int32(math.Floor(x * (1 << 16))) }

// inside reports whether the fixed-point position falls at least one
// pixel inside the world image.
func (wd *world) inside(u, v int32) bool {
	x, y := u>>16, v>>16
	return x >= 1 && y >= 1 && int(x) < wd.w-1 && int(y) < wd.h-1
}

// sample fills H rows of W pixels of out (rows outStride bytes apart)
// with the nearest world pixel of each frame pixel, the border colour
// outside the image. The frame maps to a parallelogram in the world
// image; if its four corners (and so all of it) fall inside, no pixel
// needs the bounds test and sampleInside runs.
func (wd *world) sample(out []byte, outStride, W, H int, st sampling) {
	w1, h1 := int32(W-1), int32(H-1)
	if wd.inside(st.u, st.v) && wd.inside(st.u+w1*st.duc, st.v+w1*st.dvc) &&
		wd.inside(st.u+h1*st.dur, st.v+h1*st.dvr) && wd.inside(st.u+w1*st.duc+h1*st.dur, st.v+w1*st.dvc+h1*st.dvr) &&
		len(out) >= (H-1)*outStride+4*W {
		sampleInside(wd.pix, wd.w, out, outStride, W, H, st)
	} else {
		sampleClipped(wd.pix, wd.w, wd.h, wd.border, out, outStride, W, H, st)
	}
}

// packUV packs a fixed-point position into one word, v in the high half
// and u in the low half. For positions with both coordinates in
// [0, 2³¹), adding packUV(du, dv) (two's complement, so a negative du
// borrows from the high half exactly as it should) steps both
// coordinates at once: the sum is packUV(u+du, v+dv) as long as u+du
// stays in [0, 2³²).
func packUV(u, v int32) uint64 { return uint64(int64(v)<<32 + int64(u)) }

// sampleInside copies the sampled pixels with no bounds tests; the caller
// has checked that every sample falls inside the world image (so every
// coordinate lies in [2¹⁶, 2³¹)) and that out holds H rows of W pixels.
func sampleInside(pix []uint32, ww int, out []byte, outStride, W, H int, st sampling) {
	done := sampleInsideSIMD(pix, ww, out, outStride, W, H, st)
	if done == W {
		return
	}
	base := unsafe.Pointer(unsafe.SliceData(pix))
	dst := unsafe.Pointer(unsafe.SliceData(out))
	stride := uintptr(ww) * 4
	d := packUV(st.duc, st.dvc)
	// The columns the assembly left: their first sample and the same steps.
	ur, vr := st.u+int32(done)*st.duc, st.v+int32(done)*st.dvc
	for row := 0; row < H; row++ {
		sampleRow(base, stride, unsafe.Add(dst, row*outStride+4*done), W-done, packUV(ur, vr), d)
		ur += st.dur
		vr += st.dvr
	}
}

// sampleRow copies n samples of one frame row starting at the packed
// position p (see packUV) and stepping by d. One addition steps both
// coordinates; four samples a turn halve the loop's own work. It is kept
// out of line so that its few loop variables stay in registers.
//
//go:noinline
func sampleRow(base unsafe.Pointer, stride uintptr, o unsafe.Pointer, n int, p, d uint64) {
	// The output address is computed from o each time rather than
	// advanced, so that no pointer ever points past the row's end (the
	// race detector's pointer checks refuse that).
	i := 0
	for ; i+4 <= n; i += 4 {
		q := (*[4]uint32)(unsafe.Add(o, 4*i))
		p1 := p + d
		p2 := p1 + d
		p3 := p2 + d
		q[0] = *(*uint32)(unsafe.Add(base, uintptr(p>>48)*stride+uintptr(uint16(p>>16))*4))
		q[1] = *(*uint32)(unsafe.Add(base, uintptr(p1>>48)*stride+uintptr(uint16(p1>>16))*4))
		q[2] = *(*uint32)(unsafe.Add(base, uintptr(p2>>48)*stride+uintptr(uint16(p2>>16))*4))
		q[3] = *(*uint32)(unsafe.Add(base, uintptr(p3>>48)*stride+uintptr(uint16(p3>>16))*4))
		p = p3 + d
	}
	for ; i < n; i++ {
		*(*uint32)(unsafe.Add(o, 4*i)) = *(*uint32)(unsafe.Add(base, uintptr(p>>48)*stride+uintptr(uint16(p>>16))*4))
		p += d
	}
}

// sampleClipped is the bounds-checked sampler: samples outside the world
// image take the border colour.
func sampleClipped(pix []uint32, ww, wh int, border uint32, out []byte, outStride, W, H int, st sampling) {
	uw, uh := uint(ww), uint(wh)
	ur, vr := st.u, st.v
	for row := 0; row < H; row++ {
		line := out[row*outStride : row*outStride+4*W]
		u, v := ur, vr
		for col := 0; col < W; col++ {
			x, y := uint(u>>16), uint(v>>16)
			px := border
			if x < uw && y < uh {
				px = pix[y*uw+x]
			}
			binary.LittleEndian.PutUint32(line[4*col:], px)
			u += st.duc
			v += st.dvc
		}
		ur += st.dur
		vr += st.dvr
	}
}

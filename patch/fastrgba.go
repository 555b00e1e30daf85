package patch

import "unsafe"

// tokenizeRGBA3 is the whole of Tokenize for 4-byte pixels (RGBA, NRGBA)
// and three channels, the hot path. It walks the frame row by row; with
// non-overlapping columns (StrideX = PatchW) one call converts the part of
// a frame row that falls in whole cells (rgbaCells3), else each patch row
// is converted alone (rgbaRow3). Values come from a 256-entry table.
func tokenizeRGBA3(g *Grid, src *pixSource, data []float32) {
	pw, ph := g.PatchW, g.PatchH
	D, rowLen := g.D(), 3*g.PatchW
	whole := 0 // cells of a row that lie inside the frame, with StrideX = PatchW
	if g.StrideX == pw {
		whole = min(g.Cols, g.Width/pw)
	}
	// done: frame rows below this have their whole cells converted.
	done := 0
	if rows := min(g.Height, g.Rows*ph); rgbaFrameSIMD(g, src, data, rows, whole) {
		done = rows
	}
	for r := 0; r < g.Rows; r++ {
		for py := 0; py < ph; py++ {
			y := r*g.StrideY + py
			first := r*g.Cols*D + py*rowLen
			c0 := 0
			if y < done {
				c0 = whole
			} else if y < g.Height && whole > 0 {
				off := y * src.stride
				rgbaCells3(data[first:first+(whole-1)*D+rowLen], src.pix[off:off+4*whole*pw], whole, pw, D)
				c0 = whole
			}
			for c := c0; c < g.Cols; c++ {
				o := first + c*D
				d := data[o : o+rowLen : o+rowLen]
				if y >= g.Height {
					fillValues(d, g.Fill)
					continue
				}
				x0 := c * g.StrideX
				nx := min(pw, g.Width-x0)
				off := y*src.stride + 4*x0
				rgbaRow3(d[:3*nx], src.pix[off:off+4*nx])
				if nx < pw {
					fillValues(d[3*nx:], g.Fill)
				}
			}
		}
	}
}

// rgbaCells3 converts cells·pw pixels of one frame row (p) into the rows
// of cells consecutive tokens: pixel x of cell c goes to
// dst[c·D + 3x : c·D + 3x + 3].
func rgbaCells3(dst []float32, p []byte, cells, pw, D int) {
	if cells <= 0 || pw <= 0 || len(p) < 4*cells*pw || len(dst) < (cells-1)*D+3*pw {
		return
	}
	// Pointer arithmetic inside the two slices, whose lengths are checked
	// above: a bounds-checked loop spends most of its instructions on
	// slice bookkeeping.
	done := rgbaCellsSIMD(dst, p, cells, pw, D)
	if done == pw {
		return
	}
	sp, dp := unsafe.Pointer(&p[0]), unsafe.Pointer(&dst[0])
	for c := 0; c < cells; c++ {
		s := unsafe.Add(sp, 4*pw*c)
		d := unsafe.Add(dp, 4*D*c)
		for x := done; x < pw; x++ {
			px := (*[4]byte)(unsafe.Add(s, 4*x))
			v := (*[3]float32)(unsafe.Add(d, 12*x))
			v[0], v[1], v[2] = unit[px[0]], unit[px[1]], unit[px[2]]
		}
	}
}

package patch

import "unsafe"

// tokenizeRows is Tokenize for packed sources (4-byte RGBA/NRGBA pixels,
// 1-byte grey). It walks the frame row by row; with non-overlapping
// columns (StrideX = PatchW) one call converts the part of a frame row
// that falls in whole cells (src.cells), else each patch row is converted
// alone (src.row). For RGBA with three channels, the hot path, an
// assembly routine converts the whole frame where the CPU allows.
func tokenizeRows(g *Grid, src *pixSource, data []float32) {
	pw, ph, C := g.PatchW, g.PatchH, g.Channels
	D, rowLen := g.D(), C*g.PatchW
	whole := 0 // cells of a row that lie inside the frame, with StrideX = PatchW
	if g.StrideX == pw {
		whole = min(g.Cols, g.Width/pw)
	}
	// done: frame rows below this have their whole cells converted.
	done := 0
	if rows := min(g.Height, g.Rows*ph); src.kind == kindRGBA && C == 3 && rgbaFrameSIMD(g, src, data, rows, whole) {
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
				src.cells(data[first:first+(whole-1)*D+rowLen], y, whole, pw, D, C)
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
				src.row(d[:C*nx], x0, y, nx, C)
				if nx < pw {
					fillValues(d[C*nx:], g.Fill)
				}
			}
		}
	}
}

// cells converts the first cells whole cells of frame row y (StrideX =
// PatchW) into the rows of cells consecutive tokens starting at dst.
func (s *pixSource) cells(dst []float32, y, cells, pw, D, C int) {
	if s.kind == kindRGBA && C == 3 {
		off := y * s.stride
		rgbaCells3(dst, s.pix[off:off+4*cells*pw], cells, pw, D)
		return
	}
	if s.kind == kindGray {
		off := y * s.stride
		grayCells(dst, s.pix[off:off+cells*pw], cells, pw, D, C)
		return
	}
	if s.kind == kindRGBA && C == 1 {
		off := y * s.stride
		rgbaCells1(dst, s.pix[off:off+4*cells*pw], cells, pw, D)
		return
	}
	for c := 0; c < cells; c++ {
		s.row(dst[c*D:c*D+C*pw], c*pw, y, pw, C)
	}
}

// rgbaCells1 is rgbaCells3 giving one luma value a pixel.
func rgbaCells1(dst []float32, p []byte, cells, pw, D int) {
	if cells <= 0 || pw <= 0 || len(p) < 4*cells*pw || len(dst) < (cells-1)*D+pw {
		return
	}
	sp, dp := unsafe.Pointer(&p[0]), unsafe.Pointer(&dst[0])
	for c := 0; c < cells; c++ {
		s := unsafe.Add(sp, 4*pw*c)
		d := unsafe.Add(dp, 4*D*c)
		for x := 0; x < pw; x++ {
			px := (*[4]byte)(unsafe.Add(s, 4*x))
			*(*float32)(unsafe.Add(d, 4*x)) = luma(px[0], px[1], px[2])
		}
	}
}

// grayCells is rgbaCells3 for grey bytes, giving C = 1 or 3 values a pixel.
func grayCells(dst []float32, p []byte, cells, pw, D, C int) {
	if cells <= 0 || pw <= 0 || len(p) < cells*pw || len(dst) < (cells-1)*D+C*pw {
		return
	}
	sp, dp := unsafe.Pointer(&p[0]), unsafe.Pointer(&dst[0])
	for c := 0; c < cells; c++ {
		s := unsafe.Add(sp, pw*c)
		d := unsafe.Add(dp, 4*D*c)
		if C == 1 {
			for x := 0; x < pw; x++ {
				*(*float32)(unsafe.Add(d, 4*x)) = unit[*(*byte)(unsafe.Add(s, x))]
			}
			continue
		}
		for x := 0; x < pw; x++ {
			v := unit[*(*byte)(unsafe.Add(s, x))]
			o := (*[3]float32)(unsafe.Add(d, 12*x))
			o[0], o[1], o[2] = v, v, v
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

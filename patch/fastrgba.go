package patch

// tokenizeRGBA3 is the whole of Tokenize for 4-byte pixels (RGBA, NRGBA)
// and three channels, the hot path: it walks the frame row by row and
// converts each patch row with rgbaRow3 (a 256-entry table lookup a
// value). Tried and measured slower or no faster on amd64: packing two
// float32 bit patterns into one 8-byte store through an unsafe byte view,
// and inlining the row loop here (it spills registers).
func tokenizeRGBA3(g *Grid, src *pixSource, data []float32) {
	pw, ph := g.PatchW, g.PatchH
	D, rowLen := g.D(), 3*g.PatchW
	for r := 0; r < g.Rows; r++ {
		for py := 0; py < ph; py++ {
			y := r*g.StrideY + py
			for c := 0; c < g.Cols; c++ {
				o := (r*g.Cols+c)*D + py*rowLen
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

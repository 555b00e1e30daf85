package nets

import "math"

// expf is exp for float32 arguments: Cody–Waite range reduction
// x = n·ln2 + r, |r| ≤ ln2/2, and a degree-6 polynomial for e^r
// (coefficients of Cephes' expf, from memory; checked against math.Exp in
// TestExpTanhAccuracy). Arguments below -87.3 (where e^x leaves the normal
// float32 range) give 0, above 88.7 give +Inf.
func expf(x float32) float32 {
	switch {
	case x != x:
		return x
	case x > 88.72283:
		return float32(math.Inf(1))
	case x < -87.33654:
		return 0
	}
	const (
		log2e = 1.44269504088896341
		c1    = 0.693359375
		c2    = -2.12194440e-4
	)
	fn := x*log2e + 0.5
	n := int32(fn)
	if fn < 0 && float32(n) != fn {
		n-- // floor for negative values
	}
	nf := float32(n)
	r := x - nf*c1 - nf*c2
	p := float32(1.9875691500e-4)
	p = p*r + 1.3981999507e-3
	p = p*r + 8.3334519073e-3
	p = p*r + 4.1665795894e-2
	p = p*r + 1.6666665459e-1
	p = p*r + 5.0000001201e-1
	p = p*r*r + r + 1
	// scale by 2^n in two steps so that n = -126 or 128 stays finite.
	h := n / 2
	return p * math.Float32frombits(uint32(h+127)<<23) * math.Float32frombits(uint32(n-h+127)<<23)
}

// tanhf is tanh for float32: an odd polynomial for |x| < 0.625
// (Cephes' tanhf coefficients, from memory) and 1 − 2/(e^{2|x|}+1)
// above; ±1 beyond |x| = 9.01 where float32 rounds tanh to ±1.
func tanhf(x float32) float32 {
	ax := x
	if ax < 0 {
		ax = -ax
	}
	switch {
	case x != x:
		return x
	case ax < 0.625:
		z := x * x
		y := float32(-5.70498872745e-3)
		y = y*z + 2.06390887954e-2
		y = y*z - 5.37397155531e-2
		y = y*z + 1.33314422036e-1
		y = y*z - 3.33332819422e-1
		return y*z*x + x
	case ax > 9.01:
		if x < 0 {
			return -1
		}
		return 1
	}
	y := 1 - 2/(expf(2*ax)+1)
	if x < 0 {
		return -y
	}
	return y
}

// tanhRowGo is tanhRow in Go.
func tanhRowGo(dst, src []float32) {
	dst = dst[:len(src)]
	for i, v := range src {
		dst[i] = tanhf(v)
	}
}

// softmaxRow replaces the n logits in row by their softmax, subtracting
// the row's largest value first so that no exponential overflows (logits
// of ±1e4 stay finite). An empty row is left alone.
func softmaxRow(row []float32) {
	if len(row) == 0 {
		return
	}
	inv := 1 / expRow(row)
	for i := range row {
		row[i] *= inv
	}
}

// expRow replaces a non-empty row z by e^(z − max z) and returns the sum,
// which is at least 1 (the largest entry contributes e^0): the unnormalised
// softmax.
func expRow(row []float32) float32 { return expSubRow(row, maxRow(row)) }

// maxRowGo is the largest value of a non-empty row.
func maxRowGo(row []float32) float32 {
	mx := row[0]
	for _, v := range row[1:] {
		if v > mx {
			mx = v
		}
	}
	return mx
}

// expSubRowGo sets row[i] = e^(row[i]−m) with expf and returns the sum.
func expSubRowGo(row []float32, m float32) float32 {
	var sum float32
	for i, v := range row {
		e := expf(v - m)
		row[i] = e
		sum += e
	}
	return sum
}

func sqrtf(x float32) float32 { return float32(math.Sqrt(float64(x))) }

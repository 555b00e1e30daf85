package patch

import (
	"math"
	"math/rand/v2"
)

// normalPair returns two independent standard normal numbers by
// Marsaglia's polar method (Marsaglia & Bray, SIAM Review 6, 1964). It uses
// only +, −, ×, ÷, sqrt (all correctly rounded by IEEE 754) and detLog, so
// the numbers are the same on every machine; math/rand's NormFloat64 and
// math.Log may differ in the last bit between architectures (assembly
// versions, fused multiply-adds).
func normalPair(r *rand.Rand) (float64, float64) {
	for {
		// 2·x is exact, so a fused multiply-add here rounds the same.
		u := float64(2*r.Float64()) - 1
		v := float64(2*r.Float64()) - 1
		s := float64(u*u) + float64(v*v)
		if s >= 1 || s == 0 {
			continue
		}
		f := math.Sqrt(float64(-2*detLog(s)) / s)
		return float64(u * f), float64(v * f)
	}
}

// detLog is the natural logarithm of x > 0 (finite), computed with the
// algorithm of fdlibm's e_log.c (Sun Microsystems, 1993; the one behind
// Go's portable math.Log): x = 2^k·(1+f), log(1+f) = f − s·(f − R(s²)) with
// s = f/(2+f) and a degree-14 minimax polynomial R. Every product is
// rounded explicitly so no compiler fuses it.
func detLog(x float64) float64 {
	const (
		ln2Hi = 6.93147180369123816490e-01
		ln2Lo = 1.90821492927058770002e-10
		l1    = 6.666666666666735130e-01
		l2    = 3.999999999940941908e-01
		l3    = 2.857142874366239149e-01
		l4    = 2.222219843214978396e-01
		l5    = 1.818357216161805012e-01
		l6    = 1.531383769920937332e-01
		l7    = 1.479819860511658591e-01
	)
	f1, ki := math.Frexp(x)
	if f1 < math.Sqrt2/2 {
		f1 *= 2
		ki--
	}
	f := f1 - 1
	k := float64(ki)
	s := f / (2 + f)
	s2 := float64(s * s)
	s4 := float64(s2 * s2)
	t1 := float64(s2 * (l1 + float64(s4*(l3+float64(s4*(l5+float64(s4*l7)))))))
	t2 := float64(s4 * (l2 + float64(s4*(l4+float64(s4*l6)))))
	R := t1 + t2
	hfsq := float64(0.5 * float64(f*f))
	return float64(k*ln2Hi) - ((hfsq - (float64(s*(hfsq+R)) + float64(k*ln2Lo))) - f)
}

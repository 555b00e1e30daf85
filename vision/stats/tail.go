package stats

import (
	"fmt"
	"math"
)

// DefaultCVaRLevel is the share of the worst episodes CVaR averages when
// none is given: the worst 10%.
const DefaultCVaRLevel = 0.1

// CVaR returns the conditional value at risk of x at level alpha in
// (0, 1]: the mean of the worst alpha share of the scores, the lower-tail
// figure of Chan et al. 2020 ("Measuring the reliability of reinforcement
// learning algorithms", ICLR 2020). With n scores it is the integral of
// the empirical quantile function over [0, alpha] divided by alpha: the
// floor(alpha·n) lowest scores count in full and the next one with the
// remaining fraction. So CVaR(1..10, 0.1) = 1 and CVaR(1..10, 0.25) =
// (1 + 2 + 0.5·3)/2.5 = 1.8. alpha 0 means DefaultCVaRLevel. x is not
// modified.
func CVaR(x []float64, alpha float64) (float64, error) {
	if alpha == 0 {
		alpha = DefaultCVaRLevel
	}
	if !(alpha > 0 && alpha <= 1) {
		return math.NaN(), fmt.Errorf("CVaR: level %v is outside (0, 1]", alpha)
	}
	if len(x) == 0 {
		return math.NaN(), fmt.Errorf("CVaR: no scores")
	}
	s := sortedCopy(x)
	m := alpha * float64(len(s))
	k := int(math.Floor(m + 1e-9))
	var sum float64
	for _, v := range s[:min(k, len(s))] {
		sum += v
	}
	if f := m - float64(k); f > 1e-9 && k < len(s) {
		sum += f * s[k]
	}
	return sum / m, nil
}

// Rate is a share of episodes with its Wilson interval.
type Rate struct {
	// Count of Of episodes had the property.
	Count, Of int
	// Value is Count/Of (NaN when Of is 0); Lo and Hi the Wilson interval.
	Value, Lo, Hi float64
}

// NewRate returns count/of with its Wilson interval at level (0.95 when
// 0).
func NewRate(count, of int, level float64) Rate {
	if level == 0 {
		level = 0.95
	}
	z := stdNormal.Quantile(1 - (1-level)/2)
	r := Rate{Count: count, Of: of, Value: math.NaN()}
	if of > 0 {
		r.Value = float64(count) / float64(of)
	}
	r.Lo, r.Hi = Wilson(count, of, z)
	return r
}

// String is "3/30 (10% [3.5, 26])".
func (r Rate) String() string {
	if r.Of == 0 {
		return "0/0"
	}
	return fmt.Sprintf("%d/%d (%s%% [%s, %s])", r.Count, r.Of, short(100*r.Value), short(100*r.Lo), short(100*r.Hi))
}

package train

import (
	"fmt"
	"math"
)

// Adam is the Adam optimiser (Kingma & Ba 2015, Algorithm 1) over a flat
// float32 parameter vector, with the bias-corrected step as
// torch.optim.Adam computes it:
//
//	g ← grad + WeightDecay·θ
//	m ← β1·m + (1−β1)·g
//	v ← β2·v + (1−β2)·g²
//	θ ← θ − LR/(1−β1ᵗ) · m / (√v/√(1−β2ᵗ) + ε)
//
// The zero value is ready to use with the defaults below. Its state (M, V,
// T) is exported so that a checkpoint can save and restore it exactly.
type Adam struct {
	// LR is the learning rate. 0 means 1e-3 (Kingma & Ba's default).
	LR float64
	// Beta1 and Beta2 are the decay rates of the first and second moment
	// estimates. 0 means 0.9 and 0.999 (Kingma & Ba's defaults).
	Beta1, Beta2 float64
	// Eps is added to the denominator. 0 means 1e-8 (Kingma & Ba).
	Eps float64
	// WeightDecay adds WeightDecay·θ to the gradient (L2 regularisation,
	// "coupled", as torch.optim.Adam's weight_decay). 0 means none.
	WeightDecay float64

	// M and V are the moment estimates; T is the number of steps taken.
	M, V []float32
	T    int
}

func (a *Adam) hyper() (lr, b1, b2, eps float64) {
	lr, b1, b2, eps = a.LR, a.Beta1, a.Beta2, a.Eps
	if lr == 0 {
		lr = 1e-3
	}
	if b1 == 0 {
		b1 = 0.9
	}
	if b2 == 0 {
		b2 = 0.999
	}
	if eps == 0 {
		eps = 1e-8
	}
	return
}

// Check reports a hyper-parameter out of range.
func (a *Adam) Check() error {
	lr, b1, b2, eps := a.hyper()
	switch {
	case !(lr > 0) || math.IsInf(lr, 0):
		return fmt.Errorf("adam: learning rate %v: want a positive number", a.LR)
	case !(b1 > 0 && b1 < 1) || !(b2 > 0 && b2 < 1):
		return fmt.Errorf("adam: betas %v, %v: want numbers in (0,1)", a.Beta1, a.Beta2)
	case !(eps > 0):
		return fmt.Errorf("adam: epsilon %v: want a positive number", a.Eps)
	case !(a.WeightDecay >= 0) || math.IsInf(a.WeightDecay, 0):
		return fmt.Errorf("adam: weight decay %v: want a number ≥ 0", a.WeightDecay)
	}
	return nil
}

// Step takes one descent step on params given grads (same length). It
// allocates the moment vectors on the first call only.
func (a *Adam) Step(params, grads []float32) {
	if len(grads) != len(params) {
		panic(fmt.Sprintf("adam: %d gradients for %d parameters", len(grads), len(params)))
	}
	if len(a.M) != len(params) {
		a.M = make([]float32, len(params))
		a.V = make([]float32, len(params))
		a.T = 0
	}
	lr, b1, b2, eps := a.hyper()
	a.T++
	t := float64(a.T)
	stepSize := lr / (1 - math.Pow(b1, t))
	bc2 := math.Sqrt(1 - math.Pow(b2, t))
	wd := a.WeightDecay
	m, v := a.M[:len(params)], a.V[:len(params)]
	for i, p := range params {
		g := float64(grads[i])
		if wd != 0 {
			g += wd * float64(p)
		}
		mi := float32(b1*float64(m[i]) + (1-b1)*g)
		vi := float32(b2*float64(v[i]) + (1-b2)*g*g)
		m[i], v[i] = mi, vi
		denom := math.Sqrt(float64(vi))/bc2 + eps
		params[i] = float32(float64(p) - stepSize*float64(mi)/denom)
	}
}

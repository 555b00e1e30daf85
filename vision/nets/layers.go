package nets

// The four layer kinds. Each is written once, keeps what its backward pass
// needs from the last forward pass, accumulates parameter gradients and
// returns the gradient with respect to its input. Buffers are sized to a
// number of rows (tokens) and grow only when a larger set arrives.

// grow returns buf if it holds n values, else a new slice of n values.
func grow(buf []float32, n int) []float32 {
	if cap(buf) >= n {
		return buf[:n]
	}
	return make([]float32, n)
}

// linear is Y = X·W + b for rows×in inputs, W stored in×out (row-major),
// b of length out.
type linear struct {
	in, out    int
	woff, boff int // offsets of the weights and the bias in the net's flat parameters
	w, b       []float32
	gw, gb     []float32
	needDX     bool // compute the input gradient in backward

	x         []float32 // last input (aliased, not copied)
	ldx, rows int
	y, dx     []float32
	bt        []float32 // kernel scratch
}

func (l *linear) bind(params, grads []float32) {
	nw := l.in * l.out
	l.w, l.gw = params[l.woff:l.woff+nw], grads[l.woff:l.woff+nw]
	l.b, l.gb = params[l.boff:l.boff+l.out], grads[l.boff:l.boff+l.out]
}

func (l *linear) reserve(rows int) {
	l.y = grow(l.y, rows*l.out)
	if l.needDX {
		l.dx = grow(l.dx, rows*l.in)
	}
}

// forward computes Y for rows inputs of stride ldx (the first in values of
// each row are used) and returns it (rows×out, dense).
func (l *linear) forward(x []float32, ldx, rows int) []float32 {
	l.reserve(rows)
	l.x, l.ldx, l.rows = x, ldx, rows
	y := l.y[:rows*l.out]
	for r := 0; r < rows; r++ {
		copy(y[r*l.out:(r+1)*l.out], l.b)
	}
	if rows > 0 {
		kern.nn(rows, l.in, l.out, x, ldx, l.w, l.out, y, l.out)
	}
	return y
}

// backward takes dY (rows×out), adds Xᵀ·dY to the weight gradient and the
// column sums of dY to the bias gradient, and returns dX = dY·Wᵀ
// (rows×in), or nil when the input gradient is not needed.
func (l *linear) backward(dy []float32) []float32 {
	rows := l.rows
	for r := 0; r < rows; r++ {
		row := dy[r*l.out : (r+1)*l.out]
		for j, v := range row {
			l.gb[j] += v
		}
	}
	if rows > 0 {
		kern.tn(l.in, rows, l.out, l.x, l.ldx, dy, l.out, l.gw, l.out)
	}
	if !l.needDX {
		return nil
	}
	dx := l.dx[:rows*l.in]
	clear(dx)
	if rows > 0 {
		kern.nt(&l.bt, rows, l.out, l.in, dy, l.out, l.w, l.out, dx, l.in)
	}
	return dx
}

// tanhLayer is y = tanh(x) elementwise.
type tanhLayer struct {
	y, dx []float32
}

func (t *tanhLayer) forward(x []float32) []float32 {
	t.y = grow(t.y, len(x))
	tanhRow(t.y, x)
	return t.y
}

// backward returns dx = dy·(1 − y²).
func (t *tanhLayer) backward(dy []float32) []float32 {
	t.dx = grow(t.dx, len(dy))
	for i, g := range dy {
		y := t.y[i]
		t.dx[i] = g * (1 - y*y)
	}
	return t.dx
}

// attention is scaled dot-product attention (Vaswani et al. 2017, §3.2.1):
// O = softmax(Q·Kᵀ/√d)·V for m queries (m×d), n keys (n×d) and n values
// (n×dv); the softmax runs over the n keys of each query.
type attention struct {
	m, d, dv int
	scale    float32
	needDV   bool // compute the value gradient in backward

	q, k, v    []float32
	ldk, ldv   int
	n          int
	p, o       []float32 // m×n probabilities (see probs), m×dv output
	inv        []float32 // 1 / row sums of the unnormalised softmax
	normalized bool      // p holds P rather than e^(S − max S)
	have       bool      // p and inv hold the weights of the last forward pass
	kt         []float32 // d×n transposed keys
	bt         []float32 // kernel scratch
	dp         []float32
	dq, dk     []float32
	dvb        []float32
}

// forward returns O (m×dv). With no keys (n = 0) the output is zero.
func (a *attention) forward(q, k []float32, ldk int, v []float32, ldv, n int) []float32 {
	a.q, a.k, a.v, a.ldk, a.ldv, a.n = q, k, v, ldk, ldv, n
	a.p = grow(a.p, a.m*n)
	a.o = grow(a.o, a.m*a.dv)
	clear(a.p)
	clear(a.o)
	a.have = false
	if n == 0 {
		return a.o
	}
	// Q·Kᵀ/√d as Q times the transposed, scaled keys, so that the product
	// runs in the nn kernel (the fastest one) with n columns.
	a.kt = grow(a.kt, a.d*n)
	for j := 0; j < n; j++ {
		krow := k[j*ldk : j*ldk+a.d]
		for p, v := range krow {
			a.kt[p*n+j] = v * a.scale
		}
	}
	kern.nn(a.m, a.d, n, q, a.d, a.kt, n, a.p, n)
	// Softmax with the normalisation moved past the product: O = (E·V)/s
	// row by row, where E holds e^(S − max S) and s its row sums. That is
	// m·dv divisions' worth of work instead of m·n; P itself is normalised
	// only if a backward pass needs it.
	a.inv = grow(a.inv, a.m)
	for i := 0; i < a.m; i++ {
		a.inv[i] = 1 / expRow(a.p[i*n:(i+1)*n])
	}
	a.normalized = false
	a.have = true
	kern.nn(a.m, n, a.dv, a.p, n, v, ldv, a.o, a.dv)
	for i := 0; i < a.m; i++ {
		row := a.o[i*a.dv : (i+1)*a.dv]
		for j := range row {
			row[j] *= a.inv[i]
		}
	}
	return a.o
}

// probs returns P = softmax(Q·Kᵀ/√d) of the last forward pass (m×n).
func (a *attention) probs() []float32 {
	if !a.normalized {
		for i := 0; i < a.m; i++ {
			row := a.p[i*a.n : (i+1)*a.n]
			for j := range row {
				row[j] *= a.inv[i]
			}
		}
		a.normalized = true
	}
	return a.p[:a.m*a.n]
}

// backward takes dO (m×dv) and returns dQ (m×d), dK (n×d) and dV (n×dv,
// nil unless needDV). With S = QKᵀ/√d and P = softmax(S):
// dP = dO·Vᵀ, dS = P ⊙ (dP − rowsum(dP ⊙ P)), dQ = dS·K/√d,
// dK = dSᵀ·Q/√d, dV = Pᵀ·dO.
func (a *attention) backward(do []float32) (dq, dk, dv []float32) {
	n := a.n
	a.dq = grow(a.dq, a.m*a.d)
	a.dk = grow(a.dk, n*a.d)
	clear(a.dq)
	clear(a.dk)
	if a.needDV {
		a.dvb = grow(a.dvb, n*a.dv)
		clear(a.dvb)
		dv = a.dvb
	}
	if n == 0 {
		return a.dq, a.dk, dv
	}
	p := a.probs()
	a.dp = grow(a.dp, a.m*n)
	clear(a.dp)
	kern.nt(&a.bt, a.m, a.dv, n, do, a.dv, a.v, a.ldv, a.dp, n)
	if a.needDV {
		kern.tn(n, a.m, a.dv, p, n, do, a.dv, dv, a.dv)
	}
	for i := 0; i < a.m; i++ {
		pr := p[i*n : (i+1)*n]
		g := a.dp[i*n : (i+1)*n]
		var s float32
		for j := range pr {
			s += pr[j] * g[j]
		}
		for j := range pr {
			g[j] = pr[j] * (g[j] - s) * a.scale
		}
	}
	kern.nn(a.m, n, a.d, a.dp, n, a.k, a.ldk, a.dq, a.d)
	kern.tn(n, a.m, a.d, a.dp, n, a.q, a.d, a.dk, a.d)
	return a.dq, a.dk, dv
}

// meanPool averages n rows of d values into one row (Zaheer et al. 2017).
type meanPool struct {
	d     int
	n     int
	y, dx []float32
}

// forward returns the mean row (zeros when n = 0).
func (p *meanPool) forward(x []float32, ldx, n int) []float32 {
	p.n = n
	p.y = grow(p.y, p.d)
	clear(p.y)
	if n == 0 {
		return p.y
	}
	for r := 0; r < n; r++ {
		row := x[r*ldx : r*ldx+p.d]
		for j, v := range row {
			p.y[j] += v
		}
	}
	inv := 1 / float32(n)
	for j := range p.y {
		p.y[j] *= inv
	}
	return p.y
}

// backward returns dx (n×d): every row is dy/n.
func (p *meanPool) backward(dy []float32) []float32 {
	p.dx = grow(p.dx, p.n*p.d)
	if p.n == 0 {
		return p.dx
	}
	inv := 1 / float32(p.n)
	for r := 0; r < p.n; r++ {
		row := p.dx[r*p.d : (r+1)*p.d]
		for j := range row {
			row[j] = dy[j] * inv
		}
	}
	return p.dx
}

package nets

import (
	"fmt"

	"tilebench/vision"
)

// attnNet is the set-attention policy ("attention") and its
// position-aware variant ("posattention").
type attnNet struct {
	*core
	pos    bool
	keyH   *linear // optional hidden layer of the key function
	keyHT  tanhLayer
	key    *linear
	value  *linear // nil for the identity value
	dv     int
	pe     []float32 // Queries × QueryDim, fixed
	qoff   int
	wq, gq []float32 // QueryDim × KeySize projection
	q      []float32 // Queries × KeySize
	eoff   int
	emb    []float32 // cells × KeySize position embedding (posattention)
	gemb   []float32
	att    attention
	ot     tanhLayer
	kx, vx []float32 // infer: keys and values spread back to every token
}

func newAttn(c *core) *attnNet {
	cfg := c.cfg
	n := &attnNet{core: c, pos: cfg.Family == PosAttention}
	din := c.in.din
	kin := din
	if cfg.KeyHidden > 0 {
		n.keyH = c.linear("key.hidden", din, cfg.KeyHidden, false)
		kin = cfg.KeyHidden
	}
	n.key = c.linear("key", kin, cfg.KeySize, cfg.KeyHidden > 0)
	if cfg.Value == "linear" {
		n.value = c.linear("value", c.in.pixels(), cfg.ValueSize, false)
		n.dv = cfg.ValueSize
	} else {
		n.dv = c.in.pixels()
	}
	n.qoff = c.declare("query.proj", cfg.QueryDim, cfg.QueryDim, cfg.KeySize)
	if n.pos {
		n.eoff = c.declare("pos.embed", 0, c.grid.N(), cfg.KeySize)
	}
	n.att = attention{m: cfg.Queries, d: cfg.KeySize, dv: n.dv, needDV: n.value != nil}
	n.att.scale = 1 / sqrtf(float32(cfg.KeySize))
	c.newHead(cfg.Queries*n.dv, true)
	c.binds = append(c.binds, func() {
		n.pe = PositionalEncoding(cfg.Queries, cfg.QueryDim)
		n.q = make([]float32, cfg.Queries*cfg.KeySize)
		sz := cfg.QueryDim * cfg.KeySize
		n.wq, n.gq = c.params[n.qoff:n.qoff+sz], c.grads[n.qoff:n.qoff+sz]
		if n.pos {
			sz := c.grid.N() * cfg.KeySize
			n.emb, n.gemb = c.params[n.eoff:n.eoff+sz], c.grads[n.eoff:n.eoff+sz]
		}
	})
	return n
}

func (n *attnNet) Info() vision.Info {
	cfg := n.cfg
	if n.pos {
		return vision.Info{Family: PosAttention, Label: fmt.Sprintf("position-aware attention (key %d, %d queries, hidden %d)", cfg.KeySize, cfg.Queries, cfg.Hidden)}
	}
	return vision.Info{Family: Attention, Label: fmt.Sprintf("set attention (key %d, %d queries, hidden %d)", cfg.KeySize, cfg.Queries, cfg.Hidden), Invariant: true}
}

func (n *attnNet) Act(obs *vision.Observation, action []float64) error {
	return n.act(n.infer, obs, action)
}

// infer is Forward for acting, with the same result bit for bit: when
// some tokens are blank (black occlusion), the per-token layers run once
// for all of them (inputs.compact). Backward must not follow it.
func (n *attnNet) infer(obs *vision.Observation, out []float32) error {
	x, ldx, rows, slot, ok, err := n.in.compact(obs, n.grid)
	if err != nil {
		return err
	}
	if !ok {
		return n.Forward(obs, out)
	}
	return n.forward(x, ldx, rows, slot, out)
}

func (n *attnNet) Forward(obs *vision.Observation, out []float32) error {
	x, ldx, rows, err := n.in.build(obs, n.grid)
	if err != nil {
		return err
	}
	return n.forward(x, ldx, rows, nil, out)
}

// forward runs the net on rows of stride ldx. With slot non-nil the rows
// are distinct token rows, and token i reads row slot[i] (inputs.compact).
func (n *attnNet) forward(x []float32, ldx, rows int, slot []int32, out []float32) error {
	n.att.have = false
	if err := checkOut(out, n.hd.outDim); err != nil {
		return err
	}
	cfg := n.cfg
	kin, ldk := x, ldx
	if n.keyH != nil {
		kin = n.keyHT.forward(n.keyH.forward(x, ldx, rows))
		ldk = cfg.KeyHidden
	}
	k := n.key.forward(kin, ldk, rows)
	v, ldv := x, ldx
	if n.value != nil {
		v = n.value.forward(x, ldx, rows)
		ldv = n.dv
	}
	if slot != nil {
		k = spread(&n.kx, k, cfg.KeySize, cfg.KeySize, slot)
		v = spread(&n.vx, v, ldv, n.dv, slot)
		ldv, rows = n.dv, len(slot)
	}
	if n.pos {
		d := cfg.KeySize
		for i, c := range n.in.cellOf {
			if c >= 0 {
				row := k[i*d : (i+1)*d]
				e := n.emb[c*d : (c+1)*d]
				for j := range row {
					row[j] += e[j]
				}
			}
		}
	}
	clear(n.q)
	kern.nn(cfg.Queries, cfg.QueryDim, cfg.KeySize, n.pe, cfg.QueryDim, n.wq, cfg.KeySize, n.q, cfg.KeySize)
	o := n.att.forward(n.q, k, cfg.KeySize, v, ldv, rows)
	n.hd.forward(n.ot.forward(o), out)
	return nil
}

// spread writes row slot[i] of src (stride ld, w values used) as row i of
// *dst (dense, w wide) and returns it.
func spread(dst *[]float32, src []float32, ld, w int, slot []int32) []float32 {
	*dst = grow(*dst, len(slot)*w)
	out := *dst
	for i, s := range slot {
		copy(out[i*w:(i+1)*w], src[int(s)*ld:int(s)*ld+w])
	}
	return out
}

func (n *attnNet) Backward(dOut []float32) {
	cfg := n.cfg
	dt := n.hd.backward(dOut)
	do := n.ot.backward(dt)
	dq, dk, dv := n.att.backward(do)
	kern.tn(cfg.QueryDim, cfg.Queries, cfg.KeySize, n.pe, cfg.QueryDim, dq, cfg.KeySize, n.gq, cfg.KeySize)
	if n.pos {
		d := cfg.KeySize
		for i, c := range n.in.cellOf {
			if c >= 0 {
				g := n.gemb[c*d : (c+1)*d]
				for j, v := range dk[i*d : (i+1)*d] {
					g[j] += v
				}
			}
		}
	}
	if n.value != nil {
		n.value.backward(dv)
	}
	dkin := n.key.backward(dk)
	if n.keyH != nil {
		n.keyH.backward(n.keyHT.backward(dkin))
	}
}

func (n *attnNet) Clone() Net { return clone(n) }

// poolNet is the Deep Sets policy ("meanpool"): per-token tanh layer,
// mean over tokens, head.
type poolNet struct {
	*core
	tok  *linear
	tokT tanhLayer
	pool meanPool
}

func newPool(c *core) *poolNet {
	n := &poolNet{core: c}
	n.tok = c.linear("token", c.in.din, c.cfg.TokenHidden, false)
	n.pool.d = c.cfg.TokenHidden
	c.newHead(c.cfg.TokenHidden, true)
	return n
}

func (n *poolNet) Info() vision.Info {
	return vision.Info{Family: MeanPool, Label: fmt.Sprintf("mean-pool set policy (token %d, hidden %d)", n.cfg.TokenHidden, n.cfg.Hidden), Invariant: true}
}

func (n *poolNet) Act(obs *vision.Observation, action []float64) error {
	return n.act(n.Forward, obs, action)
}

func (n *poolNet) Forward(obs *vision.Observation, out []float32) error {
	if err := checkOut(out, n.hd.outDim); err != nil {
		return err
	}
	x, ldx, rows, err := n.in.build(obs, n.grid)
	if err != nil {
		return err
	}
	h := n.tokT.forward(n.tok.forward(x, ldx, rows))
	n.hd.forward(n.pool.forward(h, n.cfg.TokenHidden, rows), out)
	return nil
}

func (n *poolNet) Backward(dOut []float32) {
	dp := n.hd.backward(dOut)
	dh := n.pool.backward(dp)
	n.tok.backward(n.tokT.backward(dh))
}

func (n *poolNet) Clone() Net { return clone(n) }

// mlpNet is the ordered MLP ("mlp"): the head on all tokens concatenated
// in the order of the token set (grid order for an unscrambled set). It
// needs exactly the grid's token count.
type mlpNet struct {
	*core
	flat []float32
}

func newMLP(c *core) *mlpNet {
	n := &mlpNet{core: c}
	in := c.grid.N() * c.in.pixels()
	if c.cfg.PrevAction {
		in += c.in.pa
	}
	c.newHead(in, false)
	c.binds = append(c.binds, func() { n.flat = make([]float32, in) })
	return n
}

func (n *mlpNet) Info() vision.Info {
	return vision.Info{Family: MLP, Label: fmt.Sprintf("ordered MLP over %d tokens (hidden %d)", n.grid.N(), n.cfg.Hidden)}
}

func (n *mlpNet) Act(obs *vision.Observation, action []float64) error {
	return n.act(n.Forward, obs, action)
}

func (n *mlpNet) Forward(obs *vision.Observation, out []float32) error {
	if err := checkOut(out, n.hd.outDim); err != nil {
		return err
	}
	if obs != nil && obs.Tokens != nil && obs.Tokens.N != n.grid.N() {
		return fmt.Errorf("ordered MLP needs exactly %d tokens (the full %dx%d grid), got %d", n.grid.N(), n.grid.Cols, n.grid.Rows, obs.Tokens.N)
	}
	x, ldx, rows, err := n.in.build(obs, n.grid)
	if err != nil {
		return err
	}
	px := n.in.pixels()
	if ldx == px && n.in.pa == 0 {
		n.hd.forward(x[:rows*px], out)
		return nil
	}
	// Gather the pixel part of each row, then the previous action once.
	for i := 0; i < rows; i++ {
		copy(n.flat[i*px:(i+1)*px], x[i*ldx:i*ldx+px])
	}
	if n.in.pa > 0 {
		copy(n.flat[rows*px:], x[px:px+n.in.pa])
	}
	n.hd.forward(n.flat, out)
	return nil
}

func (n *mlpNet) Backward(dOut []float32) { n.hd.backward(dOut) }

func (n *mlpNet) Clone() Net { return clone(n) }

// clone rebuilds src's family and copies its parameters.
func clone(src net) Net {
	c := src.base()
	cp, err := build(c.cfg, c.grid, c.space)
	if err != nil {
		panic("nets: clone of a valid net failed: " + err.Error()) // cannot happen: the config was accepted before
	}
	copy(cp.base().params, c.params)
	return cp
}

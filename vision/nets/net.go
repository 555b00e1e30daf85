package nets

import (
	"errors"
	"fmt"
	"math"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/weights"
)

// Net is a trainable policy network of one family. It is a vision.Policy
// and exposes its parameters and gradients as flat slices for optimisers.
//
// A Net is not safe for concurrent use: give each goroutine its own Clone.
type Net interface {
	vision.Policy
	// Config returns the resolved configuration (defaults filled in).
	Config() Config
	// Grid returns the patch geometry the net was built for.
	Grid() *patch.Grid
	// Space returns the action space the net was built for.
	Space() games.Controls
	// OutputDim is the length of Forward's output: the action dimension
	// for a continuous space, the number of choices (logits) for a
	// discrete one.
	OutputDim() int
	// Params returns all parameters as one flat slice that aliases the
	// net's storage: writing to it changes the net.
	Params() []float32
	// Grads returns the gradient accumulator, same layout as Params.
	Grads() []float32
	// ZeroGrads sets every gradient to zero.
	ZeroGrads()
	// Forward computes the output for obs into out (len OutputDim) and
	// keeps what Backward needs. Continuous outputs are actions already
	// mapped into the action bounds; discrete outputs are logits.
	Forward(obs *vision.Observation, out []float32) error
	// Backward takes the gradient of a loss with respect to the output of
	// the last Forward and adds the parameter gradients into Grads.
	Backward(dOut []float32)
	// Clone returns an independent copy: same parameters (copied), own
	// buffers, gradients zero, temporal context empty.
	Clone() Net
	// Tensors returns named views of the parameters (aliasing Params), in
	// the order and with the names documented in docs/families.md.
	Tensors() []weights.Tensor
}

// New builds a net of cfg's family for tokens cut on grid and actions in
// space, with parameters drawn from seed: every weight and bias uniform in
// ±1/√fan_in (the default of torch.nn.Linear, from memory), the position
// embedding of posattention uniform in ±0.1.
func New(cfg Config, grid *patch.Grid, space games.Controls, seed uint64) (Net, error) {
	n, err := build(cfg, grid, space)
	if err != nil {
		return nil, err
	}
	c := n.base()
	rng := patch.NewRand(patch.DeriveSeed(seed, patch.StreamKey("nets-init")))
	for _, t := range c.specs {
		bound := float32(1 / math.Sqrt(float64(t.fanIn)))
		if t.fanIn <= 0 {
			bound = 0.1
		}
		for i := t.off; i < t.off+t.size; i++ {
			c.params[i] = (2*rng.Float32() - 1) * bound
		}
	}
	return n, nil
}

// net is what every family implements beyond Net.
type net interface {
	Net
	base() *core
}

// build constructs an untrained net (zero parameters).
func build(cfg Config, grid *patch.Grid, space games.Controls) (net, error) {
	n, err := plan(cfg, grid, space)
	if err != nil {
		return nil, err
	}
	ready(n)
	return n, nil
}

// ready allocates n's parameters and then every buffer at its full size,
// by one forward and backward pass on a set of Capacity tokens (the grid's
// count for mlp), so that later steps do not allocate; it leaves the
// gradients zero and the history empty.
func ready(n net) {
	c := n.base()
	c.alloc()
	rows := c.cfg.Capacity
	if c.cfg.Family == MLP {
		rows = c.grid.N()
	}
	ts := patch.NewTokenSet(rows, c.grid.D())
	ts.N = rows
	for i := range ts.Pos {
		ts.Pos[i] = c.grid.Cell(i % c.grid.N())
	}
	out := make([]float32, c.hd.outDim)
	if n.Forward(&vision.Observation{Tokens: ts, Grid: c.grid}, out) == nil {
		n.Backward(out)
	}
	c.ZeroGrads()
	n.Reset(0)
}

// plan declares a net's layers and tensors without allocating its
// parameters or buffers (alloc does), so that a weights file can be
// checked against the family before anything large is allocated.
func plan(cfg Config, grid *patch.Grid, space games.Controls) (net, error) {
	if grid == nil {
		return nil, errors.New("new policy: no patch grid")
	}
	if err := cfg.Validate(); err != nil {
		return nil, fmt.Errorf("new %s policy: %w", cfg.Resolved().Family, err)
	}
	cfg = cfg.Resolved()
	if err := checkSpace(space); err != nil {
		return nil, fmt.Errorf("new %s policy: %w", cfg.Family, err)
	}
	if cfg.Capacity == 0 {
		cfg.Capacity = 2 * grid.N()
	}
	// Refuse sizes that would allocate beyond reason (a corrupt file or a
	// typo), before allocating anything.
	if grid.N() > 1<<22 || grid.D() > 1<<22 {
		return nil, fmt.Errorf("new %s policy: %d tokens of %d values is too large", cfg.Family, grid.N(), grid.D())
	}
	rowValues := int64(grid.D())*int64(cfg.Context) + int64(space.Dim()+len(space.Names))
	if v := rowValues * int64(max(cfg.Capacity, grid.N())) * int64(cfg.Context); v > maxValues {
		return nil, fmt.Errorf("new %s policy: %d tokens of %d values with context %d need %d values of input buffers, more than %d", cfg.Family, grid.N(), grid.D(), cfg.Context, v, int64(maxValues))
	}
	c := &core{cfg: cfg, grid: grid, space: space}
	c.in.init(cfg, grid, space)
	var n net
	switch cfg.Family {
	case Attention, PosAttention:
		n = newAttn(c)
	case MeanPool:
		n = newPool(c)
	case MLP:
		n = newMLP(c)
	}
	if total := c.size(); total > maxValues {
		return nil, fmt.Errorf("new %s policy: %d parameters, more than %d", cfg.Family, total, int64(maxValues))
	}
	return n, nil
}

// maxValues bounds the parameters and input buffers of one net (512 MiB
// of float32 each).
const maxValues = 1 << 27

func checkSpace(s games.Controls) error {
	switch s.Kind {
	case games.Continuous:
		if len(s.Names) == 0 {
			return errors.New("continuous action space with no dimensions")
		}
		if len(s.Low) != len(s.Names) || len(s.High) != len(s.Names) {
			return fmt.Errorf("action space: %d names, %d low and %d high bounds", len(s.Names), len(s.Low), len(s.High))
		}
		for i := range s.Low {
			lo, hi := s.Low[i], s.High[i]
			if math.IsNaN(lo) || math.IsNaN(hi) || math.IsInf(lo, 0) || math.IsInf(hi, 0) || !(lo < hi) {
				return fmt.Errorf("action %q bounds [%v, %v]: want finite low < high", s.Names[i], lo, hi)
			}
		}
	case games.Discrete:
		if len(s.Names) < 2 {
			return fmt.Errorf("discrete action space with %d choices, want at least 2", len(s.Names))
		}
	default:
		return fmt.Errorf("action kind %d unknown", int(s.Kind))
	}
	return nil
}

// tensorSpec is one named parameter tensor inside the flat storage.
type tensorSpec struct {
	name  string
	shape []int
	off   int
	size  int
	fanIn int // for initialisation; ≤ 0 means the ±0.1 range
}

// core holds what every family shares: the flat parameters, the input
// rows, the head and the mapping of outputs to actions.
type core struct {
	cfg    Config
	grid   *patch.Grid
	space  games.Controls
	specs  []tensorSpec
	params []float32
	grads  []float32
	binds  []func()
	in     inputs
	hd     head
	out    []float32 // scratch for Act
}

func (c *core) Config() Config            { return c.cfg }
func (c *core) Grid() *patch.Grid         { return c.grid }
func (c *core) Space() games.Controls     { return c.space }
func (c *core) Params() []float32         { return c.params }
func (c *core) Grads() []float32          { return c.grads }
func (c *core) ZeroGrads()                { clear(c.grads) }
func (c *core) base() *core               { return c }
func (c *core) OutputDim() int            { return c.hd.outDim }
func (c *core) Reset(uint64)              { c.in.reset() }
func (c *core) Tensors() []weights.Tensor { return c.tensors() }
func (c *core) declare(name string, fanIn int, shape ...int) int {
	size := weights.Elements(shape)
	off := 0
	if k := len(c.specs); k > 0 {
		off = c.specs[k-1].off + c.specs[k-1].size
	}
	c.specs = append(c.specs, tensorSpec{name: name, shape: shape, off: off, size: size, fanIn: fanIn})
	return off
}

// linear declares the weight and bias of a linear layer named name.
func (c *core) linear(name string, in, out int, needDX bool) *linear {
	l := &linear{in: in, out: out, needDX: needDX}
	l.woff = c.declare(name+".weight", in, in, out)
	l.boff = c.declare(name+".bias", in, out)
	c.binds = append(c.binds, func() { l.bind(c.params, c.grads) })
	return l
}

// size is the number of parameters declared so far.
func (c *core) size() int {
	if k := len(c.specs); k > 0 {
		return c.specs[k-1].off + c.specs[k-1].size
	}
	return 0
}

func (c *core) alloc() {
	c.in.alloc()
	total := c.size()
	c.params = make([]float32, total)
	c.grads = make([]float32, total)
	for _, b := range c.binds {
		b()
	}
	c.out = make([]float32, c.hd.outDim)
}

func (c *core) tensors() []weights.Tensor {
	ts := make([]weights.Tensor, len(c.specs))
	for i, s := range c.specs {
		ts[i] = weights.Tensor{Name: s.name, Shape: append([]int(nil), s.shape...), Data: c.params[s.off : s.off+s.size : s.off+s.size]}
	}
	return ts
}

// act runs forward through f and writes the action.
func (c *core) act(f func(*vision.Observation, []float32) error, obs *vision.Observation, action []float64) error {
	if len(action) != c.space.Dim() {
		return fmt.Errorf("action buffer has %d values, want %d", len(action), c.space.Dim())
	}
	if err := f(obs, c.out); err != nil {
		return err
	}
	if c.space.Kind == games.Discrete {
		best := 0
		for i, v := range c.out {
			if v > c.out[best] {
				best = i
			}
		}
		action[0] = float64(best)
		return nil
	}
	for i, v := range c.out {
		action[i] = float64(v)
	}
	return nil
}

// inputs turns an observation into one row of din values per token:
// [pixels now | pixels of the same cell 1..k−1 steps ago | prev action].
type inputs struct {
	d, k, pa, din int
	discrete      bool
	centre        bool
	mean          []float32 // centre: the set's mean row (pixel part)
	coef          []float32 // centre: 1/n, then −1, per token
	cells         int
	buf           []float32
	hist          []float32 // (k−1) slots × cells × d
	head          int       // slot holding the previous step
	cellOf        []int     // grid index of each token of the last set (-1 none)
	slot          []int32   // compact: the row each token reads
	capacity      int
}

func (in *inputs) init(cfg Config, g *patch.Grid, s games.Controls) {
	in.d, in.k = g.D(), cfg.Context
	in.cells = g.N()
	if cfg.PrevAction {
		in.pa = s.Dim()
		if s.Kind == games.Discrete {
			in.pa = s.Choices()
			in.discrete = true
		}
	}
	in.din = in.d*in.k + in.pa
	in.capacity = cfg.Capacity
	in.centre = cfg.Centre
}

func (in *inputs) alloc() {
	if in.k > 1 {
		in.hist = make([]float32, (in.k-1)*in.cells*in.d)
	}
	if in.k > 1 || in.pa > 0 || in.centre {
		in.buf = make([]float32, in.capacity*in.din)
	}
	if in.centre {
		in.mean = make([]float32, in.d*in.k)
		in.coef = make([]float32, in.capacity)
	}
	in.cellOf = make([]int, in.capacity)
}

func (in *inputs) reset() {
	clear(in.hist)
	in.head = 0
}

// pixels is the number of leading values of each row that are pixels
// (the value function's input).
func (in *inputs) pixels() int { return in.d * in.k }

// check validates obs against the grid and the policy's inputs and sets
// cellOf, the grid cell of each token.
func (in *inputs) check(obs *vision.Observation, g *patch.Grid) error {
	if obs == nil || obs.Tokens == nil {
		return errors.New("observation has no tokens")
	}
	ts := obs.Tokens
	n := ts.N
	if ts.D != in.d {
		return fmt.Errorf("tokens have %d values, the policy was built for %d (patch %dx%d, %d channels)", ts.D, in.d, g.PatchW, g.PatchH, g.Channels)
	}
	if og := obs.Grid; og != nil && og != g && (og.Cols != g.Cols || og.Rows != g.Rows) {
		return fmt.Errorf("tokens were cut on a grid of %dx%d cells, the policy was built for %dx%d (%s)", og.Cols, og.Rows, g.Cols, g.Rows, g)
	}
	if n < 0 || len(ts.Data) < n*ts.D || len(ts.Pos) < n {
		return fmt.Errorf("token set claims %d tokens but holds %d values and %d positions", n, len(ts.Data), len(ts.Pos))
	}
	if in.pa > 0 && len(obs.PrevAction) != 0 {
		want := in.pa
		if in.discrete {
			want = 1
		}
		if len(obs.PrevAction) != want {
			return fmt.Errorf("previous action has %d values, want %d", len(obs.PrevAction), want)
		}
	}
	if cap(in.cellOf) < n {
		in.cellOf = make([]int, n)
	}
	in.cellOf = in.cellOf[:n]
	for i := 0; i < n; i++ {
		p := ts.Pos[i]
		if p.Row < 0 || p.Col < 0 || int(p.Row) >= g.Rows || int(p.Col) >= g.Cols {
			in.cellOf[i] = -1
		} else {
			in.cellOf[i] = g.Index(p)
		}
	}
	return nil
}

// build returns the rows, their stride and the token count. Without
// context or previous action the rows alias obs.Tokens.Data.
func (in *inputs) build(obs *vision.Observation, g *patch.Grid) ([]float32, int, int, error) {
	if err := in.check(obs, g); err != nil {
		return nil, 0, 0, err
	}
	ts := obs.Tokens
	n := ts.N
	if in.k == 1 && in.pa == 0 && !in.centre {
		return ts.Data[:n*in.d], in.d, n, nil
	}
	in.buf = grow(in.buf, n*in.din)
	x := in.buf
	slots := in.k - 1
	for i := 0; i < n; i++ {
		row := x[i*in.din : (i+1)*in.din]
		copy(row[:in.d], ts.Data[i*in.d:(i+1)*in.d])
		c := in.cellOf[i]
		for j := 0; j < slots; j++ {
			dst := row[(j+1)*in.d : (j+2)*in.d]
			if c < 0 {
				clear(dst)
				continue
			}
			slot := (in.head + j) % slots
			copy(dst, in.hist[(slot*in.cells+c)*in.d:(slot*in.cells+c+1)*in.d])
		}
		if in.pa > 0 {
			pa := row[in.d*in.k:]
			clear(pa)
			if len(obs.PrevAction) > 0 {
				if in.discrete {
					ch := obs.PrevAction[0]
					if ch >= 0 && int(ch) < in.pa {
						pa[int(ch)] = 1
					}
				} else {
					for j, v := range obs.PrevAction {
						pa[j] = float32(v)
					}
				}
			}
		}
	}
	if slots > 0 {
		// The slot before head becomes the newest frame.
		in.head = (in.head - 1 + slots) % slots
		h := in.hist[in.head*in.cells*in.d : (in.head+1)*in.cells*in.d]
		clear(h)
		for i := 0; i < n; i++ {
			if c := in.cellOf[i]; c >= 0 {
				copy(h[c*in.d:(c+1)*in.d], ts.Data[i*in.d:(i+1)*in.d])
			}
		}
	}
	if in.centre {
		in.centreRows(x, n)
	}
	return x[:n*in.din], in.din, n, nil
}

// centreRows subtracts, column by column, the mean over the n rows of x
// from the pixel part of every row (Config.Centre), with two matrix
// products through the kernel table: mean = (1/n)·1ᵀ·X, then X −= 1·mean.
// The sums are float32 in token order, so reordering the tokens moves
// the result by float32 rounding only.
func (in *inputs) centreRows(x []float32, n int) {
	if n == 0 {
		return
	}
	w := in.d * in.k
	in.coef = grow(in.coef, n)
	c := in.coef[:n]
	inv := 1 / float32(n)
	for i := range c {
		c[i] = inv
	}
	m := in.mean[:w]
	clear(m)
	kern.nn(1, n, w, c, n, x, in.din, m, w)
	for i := range c {
		c[i] = -1
	}
	kern.nn(n, 1, w, c, 1, m, w, x, in.din)
}

// head is the small MLP every family ends with: Linear → tanh → Linear,
// then for continuous actions tanh and the affine map of [−1, 1] onto
// [Low, High]: a = Low + (High − Low)·(tanh(y) + 1)/2.
type head struct {
	l1, l2   *linear
	t1       tanhLayer
	outDim   int
	cont     bool
	mid, amp []float32 // (High+Low)/2, (High−Low)/2
	t        []float32 // tanh(y) for continuous
	dy       []float32
}

func (c *core) newHead(in int, needDX bool) {
	h := &c.hd
	s := c.space
	h.outDim = s.Dim()
	if s.Kind == games.Discrete {
		h.outDim = s.Choices()
	} else {
		h.cont = true
		h.mid = make([]float32, h.outDim)
		h.amp = make([]float32, h.outDim)
		for i := range h.mid {
			h.mid[i] = float32((s.High[i] + s.Low[i]) / 2)
			h.amp[i] = float32((s.High[i] - s.Low[i]) / 2)
		}
		h.t = make([]float32, h.outDim)
	}
	h.dy = make([]float32, h.outDim)
	h.l1 = c.linear("head.hidden", in, c.cfg.Hidden, needDX)
	h.l2 = c.linear("head.out", c.cfg.Hidden, h.outDim, true)
}

func (h *head) forward(x []float32, out []float32) {
	z := h.l1.forward(x, len(x), 1)
	z = h.t1.forward(z)
	y := h.l2.forward(z, len(z), 1)
	if !h.cont {
		copy(out, y)
		return
	}
	for i, v := range y {
		t := tanhf(v)
		h.t[i] = t
		out[i] = h.mid[i] + h.amp[i]*t
	}
}

func (h *head) backward(dout []float32) []float32 {
	dy := h.dy
	if h.cont {
		for i, g := range dout[:h.outDim] {
			dy[i] = g * h.amp[i] * (1 - h.t[i]*h.t[i])
		}
	} else {
		copy(dy, dout[:h.outDim])
	}
	dz := h.l2.backward(dy)
	dz = h.t1.backward(dz)
	return h.l1.backward(dz)
}

func checkOut(out []float32, want int) error {
	if len(out) != want {
		return fmt.Errorf("output buffer has %d values, want %d", len(out), want)
	}
	return nil
}

// compact is build for inference when some tokens are blank (every value
// zero, as black occlusion leaves them): it returns the rows of the
// non-blank tokens followed by one row standing for every blank token,
// their stride, the row count, and slot[i], the row that token i reads.
// Every per-token layer gives a blank token the result of that last row,
// bit for bit, so the layers run on the distinct rows only and the
// results are spread back by slot before the set is mixed. Centring
// gives each row the bits build gives it. ok is false (and nothing is
// built) when no token is blank, or with context frames or a previous
// action, whose rows are not blank when the token is.
func (in *inputs) compact(obs *vision.Observation, g *patch.Grid) (x []float32, ldx, rows int, slot []int32, ok bool, err error) {
	if err := in.check(obs, g); err != nil {
		return nil, 0, 0, nil, false, err
	}
	if in.k != 1 || in.pa != 0 {
		return nil, 0, 0, nil, false, nil
	}
	ts := obs.Tokens
	n, d := ts.N, in.d
	if cap(in.slot) < n {
		in.slot = make([]int32, n)
	}
	slot = in.slot[:n]
	kept := 0
	for i := 0; i < n; i++ {
		if blankRow(ts.Data[i*d : (i+1)*d]) {
			slot[i] = -1
		} else {
			slot[i] = int32(kept)
			kept++
		}
	}
	if kept == n {
		return nil, 0, 0, nil, false, nil
	}
	in.buf = grow(in.buf, (kept+1)*d)
	x = in.buf[:(kept+1)*d]
	blank := x[kept*d:]
	clear(blank)
	var m []float32
	if in.centre {
		// As centreRows: the mean by the kernel (blank rows add exactly
		// 0), then x − m, which is what its x + (−1)·m rounds to.
		in.coef = grow(in.coef, n)
		c := in.coef[:n]
		inv := 1 / float32(n)
		for i := range c {
			c[i] = inv
		}
		m = in.mean[:d]
		clear(m)
		kern.nn(1, n, d, c, n, ts.Data, d, m, d)
		subRow(blank, blank, m)
	}
	for i, s := range slot {
		if s < 0 {
			slot[i] = int32(kept)
			continue
		}
		dst, src := x[int(s)*d:int(s+1)*d], ts.Data[i*d:(i+1)*d]
		if m != nil {
			subRow(dst, src, m)
		} else {
			copy(dst, src)
		}
	}
	return x, d, kept + 1, slot, true, nil
}

// blankRowGo is blankRow in Go.
func blankRowGo(row []float32) bool {
	var bits uint32
	for _, v := range row {
		bits |= math.Float32bits(v)
	}
	return bits == 0
}

// subRowGo is subRow in Go.
func subRowGo(dst, src, m []float32) {
	src, m = src[:len(dst)], m[:len(dst)]
	for i := range dst {
		dst[i] = src[i] - m[i]
	}
}

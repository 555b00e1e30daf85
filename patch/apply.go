package patch

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Occlusion shapes, on grid cells (frame space, before scrambling). For
// every kind with a ratio R, k = round-half-even(R·N) cells are hidden,
// with R read as an exact decimal:
//
//   - random:R: k cells chosen uniformly without replacement, drawn anew
//     every step.
//   - block:R: one contiguous block of k cells: w columns wide (about the
//     grid's aspect ratio), filled row by row from its top-left corner, so
//     its last row may be shorter. Placed uniformly at random once per
//     sequence.
//   - bands:R: stripes along whole rows (h) or whole columns (v); the
//     direction is drawn once per sequence unless given. k/L full lines
//     (L = Cols for rows, Rows for columns) plus one partial line holding
//     the remainder, spread evenly over the grid from a random offset.
//   - sweep:R[:P]: the block of block:R, moving one cell every P steps
//     (default 1) from side to side, bouncing at the edges: horizontally
//     if it is narrower than the grid, else vertically. Its row (or
//     column) and its starting phase are drawn once per sequence.
//   - mask:FILE.png: a PNG of the source frame's size; a pixel whose grey
//     value (color.GrayModel, transparent counts as black) is ≥ 128 is
//     occluded; a cell is occluded when at least half of its pixels that
//     lie inside the source frame are.
//
// Random streams (DeriveSeed of the Reset seed with StreamKey(name) and
// then the listed keys): "scramble" (epoch) for permutations, rotations
// and flips; "occlude" (t) for random:R, "occlude" () for the per-sequence
// shapes; "fill" (t); "pixel-noise" (t); "noise-tokens" (t); "duplicates"
// (t).
var (
	keyScramble    = StreamKey("scramble")
	keyOcclude     = StreamKey("occlude")
	keyFill        = StreamKey("fill")
	keyPixelNoise  = StreamKey("pixel-noise")
	keyNoiseTokens = StreamKey("noise-tokens")
	keyDuplicates  = StreamKey("duplicates")
)

// pipeState is everything a Pipeline computes once or keeps between steps.
type pipeState struct {
	pr      parsedSpec
	seed    uint64
	scrK    int // tokens moved by partial:F
	occK    int // cells hidden by random/block/bands/sweep
	bw, bh  int // block and sweep size in cells
	photo   bool
	ctm1    float32    // contrast − 1
	add     [3]float32 // brightness + shift per channel
	sigma   float64
	orients int // number of orientations drawn: 1, 2, 4 or 8

	work    []float32 // N·D: source after photometric and fill
	occ     []bool    // N: occluded source cells of the current step
	fixed   []bool    // N: mask cells from a file
	idx     []int     // N: scratch for choosing cells
	perm    []int     // N: cached scramble of the current epoch
	orient  []uint8   // N: cached orientation per output slot
	epoch   int
	valid   bool
	keys    []float64 // max(Rows,Cols): local sort keys
	line    []int     // max(Rows,Cols): local scratch
	outPerm []int     // Capacity: Perm of the last Apply
	outOri  []uint8   // Capacity
	outCell []int     // N: cell of each real output token
	cells   []Pos     // N: g.Cell(i)
	maskIdx []int     // N: ascending occluded cells

	// per-sequence shape placement
	blockR, blockC int
	bandsDir       byte
	bandsOff       int
	sweepPhase     int
	sweepLine      int

	omap [8][]int32 // pixel maps per orientation (dst pixel → src pixel)
}

func newPipeline(g *Grid, spec Spec) (*Pipeline, error) {
	if g == nil {
		return nil, fmt.Errorf("pipeline: no grid")
	}
	pr, err := spec.parse()
	if err != nil {
		return nil, err
	}
	p := &Pipeline{g: g, spec: spec}
	p.pcg = rand.NewPCG(1, 2)
	p.rng = rand.New(p.pcg)
	x := &p.x
	x.pr = pr
	N, D := g.N(), g.D()
	if spec.Rotate && g.PatchW != g.PatchH {
		return nil, fmt.Errorf("rotate: patches are %dx%d; rotation by 90° needs square patches", g.PatchW, g.PatchH)
	}
	if pr.scr == scrPartial {
		x.scrK = countOf(pr.frac, N)
	}
	if pr.ratio != nil {
		x.occK = countOf(pr.ratio, N)
	}
	if pr.occ == occBlock || pr.occ == occSweep {
		x.bw, x.bh = blockSize(x.occK, g.Cols, g.Rows)
	}
	if pr.occ == occMask {
		cells, err := readMaskFile(g, pr.maskPath)
		if err != nil {
			return nil, err
		}
		x.fixed = cells
	}
	ct := spec.Contrast
	if ct == 0 {
		ct = 1
	}
	x.ctm1 = float32(ct - 1)
	for c := range x.add {
		sh := spec.Shift[c]
		if g.Channels == 1 {
			sh = spec.Shift[0]
		}
		x.add[c] = float32(spec.Brightness + sh)
	}
	x.sigma = spec.PixelNoise
	x.photo = x.ctm1 != 0 || x.add != [3]float32{} || x.sigma != 0
	x.orients = 1
	if spec.Rotate {
		x.orients *= 4
	}
	if spec.Flip {
		x.orients *= 2
	}
	if x.orients > 1 {
		npx := g.PatchW * g.PatchH
		for o := 0; o < 8; o++ {
			if o&3 != 0 && !spec.Rotate || o&4 != 0 && !spec.Flip {
				continue
			}
			m := make([]int32, npx)
			for y := 0; y < g.PatchH; y++ {
				for xx := 0; xx < g.PatchW; xx++ {
					sx, sy := orientSrc(uint8(o), xx, y, g.PatchW, g.PatchH)
					m[y*g.PatchW+xx] = int32(sy*g.PatchW + sx)
				}
			}
			x.omap[o] = m
		}
	}
	capa := p.Capacity()
	x.work = make([]float32, N*D)
	x.occ = make([]bool, N)
	x.idx = make([]int, N)
	x.perm = make([]int, N)
	x.orient = make([]uint8, N)
	x.keys = make([]float64, max(g.Rows, g.Cols))
	x.line = make([]int, max(g.Rows, g.Cols))
	x.outPerm = make([]int, capa)
	x.outOri = make([]uint8, capa)
	x.outCell = make([]int, N)
	x.cells = make([]Pos, N)
	setGridPos(g, x.cells)
	x.maskIdx = make([]int, 0, N)
	if len(pr.corr) > 0 {
		if p.corr, err = newCorrState(g, pr.corr); err != nil {
			return nil, err
		}
	}
	p.reset(0)
	return p, nil
}

// Spec returns the pipeline's spec.
func (p *Pipeline) Spec() Spec { return p.spec }

// Grid returns the pipeline's grid.
func (p *Pipeline) Grid() *Grid { return p.g }

// Seed returns the seed of the current sequence (the last Reset).
func (p *Pipeline) Seed() uint64 { return p.x.seed }

// blockSize picks a w×h cell block holding k cells filled row by row:
// w near sqrt(k·cols/rows) so the block has about the grid's shape.
func blockSize(k, cols, rows int) (w, h int) {
	if k == 0 {
		return 0, 0
	}
	w = int(math.Round(math.Sqrt(float64(k) * float64(cols) / float64(rows))))
	w = min(max(w, 1), cols)
	h = (k + w - 1) / w
	if h > rows {
		w = (k + rows - 1) / rows
		h = (k + w - 1) / w
	}
	return w, h
}

// orientSrc returns the source pixel that lands on (x, y) of a pw×ph patch
// turned by o (bit 2: mirror left-right first; bits 0–1: clockwise
// quarter turns after). Turns need pw = ph.
func orientSrc(o uint8, x, y, pw, ph int) (int, int) {
	for q := 0; q < int(o&3); q++ {
		// A clockwise turn puts old (y, P−1−x) at new (x, y).
		x, y = y, pw-1-x
	}
	if o&4 != 0 {
		x = pw - 1 - x
	}
	return x, y
}

// seedStream points p.rng at the stream named by key and the further keys.
func (p *Pipeline) seedStream(key uint64, keys ...uint64) *rand.Rand {
	s := DeriveSeed(p.x.seed, key)
	for _, k := range keys {
		s = DeriveSeed(s, k)
	}
	p.pcg.Seed(DeriveSeed(s, 1), DeriveSeed(s, 2))
	return p.rng
}

func (p *Pipeline) reset(seed uint64) {
	x := &p.x
	x.seed = seed
	x.valid = false
	if p.corr != nil {
		p.corr.reset(p)
	}
	g := p.g
	switch x.pr.occ {
	case occBlock, occSweep:
		r := p.seedStream(keyOcclude)
		x.blockR = r.IntN(g.Rows - x.bh + 1)
		x.blockC = r.IntN(g.Cols - x.bw + 1)
		if x.pr.occ == occSweep {
			if x.bw < g.Cols {
				x.sweepLine = x.blockR
				x.sweepPhase = r.IntN(2 * (g.Cols - x.bw))
			} else if x.bh < g.Rows {
				x.sweepLine = x.blockC
				x.sweepPhase = r.IntN(2 * (g.Rows - x.bh))
			}
		}
	case occBands:
		r := p.seedStream(keyOcclude)
		x.bandsDir = x.pr.bandsDir
		if x.bandsDir == 0 {
			x.bandsDir = "hv"[r.IntN(2)]
		}
		lines := g.Rows
		if x.bandsDir == 'v' {
			lines = g.Cols
		}
		x.bandsOff = r.IntN(lines)
	}
}

// bounce maps a phase onto 0..travel and back (a ping-pong path).
func bounce(phase, travel int) int {
	if travel == 0 {
		return 0
	}
	u := phase % (2 * travel)
	if u > travel {
		u = 2*travel - u
	}
	return u
}

// occlusion fills x.occ and x.maskIdx for step t.
func (p *Pipeline) occlusion(t int) {
	x, g := &p.x, p.g
	N := g.N()
	clear(x.occ)
	switch x.pr.occ {
	case occRandom:
		r := p.seedStream(keyOcclude, uint64(t))
		for i := range x.idx {
			x.idx[i] = i
		}
		for i := 0; i < x.occK; i++ {
			j := i + r.IntN(N-i)
			x.idx[i], x.idx[j] = x.idx[j], x.idx[i]
			x.occ[x.idx[i]] = true
		}
	case occBlock, occSweep:
		r0, c0 := x.blockR, x.blockC
		if x.pr.occ == occSweep {
			s := t / x.pr.period
			if x.bw < g.Cols {
				r0, c0 = x.sweepLine, bounce(x.sweepPhase+s, g.Cols-x.bw)
			} else if x.bh < g.Rows {
				r0, c0 = bounce(x.sweepPhase+s, g.Rows-x.bh), x.sweepLine
			}
		}
		for k := 0; k < x.occK; k++ {
			x.occ[(r0+k/x.bw)*g.Cols+c0+k%x.bw] = true
		}
	case occBands:
		lines, length := g.Rows, g.Cols
		if x.bandsDir == 'v' {
			lines, length = g.Cols, g.Rows
		}
		used := (x.occK + length - 1) / length
		for j := 0; j < used; j++ {
			line := (x.bandsOff + j*lines/used) % lines
			n := length
			if j == used-1 && x.occK%length != 0 {
				n = x.occK % length
			}
			for k := 0; k < n; k++ {
				if x.bandsDir == 'v' {
					x.occ[k*g.Cols+line] = true
				} else {
					x.occ[line*g.Cols+k] = true
				}
			}
		}
	case occMask:
		copy(x.occ, x.fixed)
	}
	x.maskIdx = x.maskIdx[:0]
	for i, o := range x.occ {
		if o {
			x.maskIdx = append(x.maskIdx, i)
		}
	}
}

// scramble fills x.perm and x.orient for epoch e (cached).
func (p *Pipeline) scramble(e int) {
	x, g := &p.x, p.g
	if x.valid && x.epoch == e {
		return
	}
	x.valid, x.epoch = true, e
	N := g.N()
	for i := range x.perm {
		x.perm[i] = i
	}
	r := p.seedStream(keyScramble, uint64(e))
	switch x.pr.scr {
	case scrFull:
		// Fisher–Yates (Knuth, TAOCP vol. 2, Algorithm P).
		for i := N - 1; i > 0; i-- {
			j := r.IntN(i + 1)
			x.perm[i], x.perm[j] = x.perm[j], x.perm[i]
		}
	case scrPartial:
		k := x.scrK
		for i := range x.idx {
			x.idx[i] = i
		}
		for i := 0; i < k; i++ {
			j := i + r.IntN(N-i)
			x.idx[i], x.idx[j] = x.idx[j], x.idx[i]
		}
		// Sattolo's algorithm: a uniformly random single k-cycle, so no
		// chosen token keeps its cell (a single chosen token, k = 1,
		// cannot move).
		chosen := x.idx[:k]
		for i := k - 1; i > 0; i-- {
			j := r.IntN(i)
			x.perm[chosen[i]], x.perm[chosen[j]] = x.perm[chosen[j]], x.perm[chosen[i]]
		}
	case scrLocal:
		p.localShuffle(r)
	}
	if x.orients > 1 {
		for i := range x.orient {
			var o uint8
			if p.spec.Rotate {
				o = uint8(r.IntN(4))
			}
			if p.spec.Flip && r.IntN(2) == 1 {
				o |= 4
			}
			x.orient[i] = o
		}
	}
}

// localShuffle moves every token at most K cells along each axis: each
// row is sorted by the key col + (K+1)·U[0,1), then each column by
// row + (K+1)·U[0,1). With keys jittered by less than K+1, two tokens
// K+1 or more apart never swap order, so none moves more than K places.
func (p *Pipeline) localShuffle(r *rand.Rand) {
	x, g := &p.x, p.g
	K := float64(x.pr.local + 1)
	pass := func(lines, length int, at func(line, k int) int) {
		for l := 0; l < lines; l++ {
			keys, order := x.keys[:length], x.line[:length]
			for k := 0; k < length; k++ {
				keys[k] = float64(k) + float64(K*r.Float64()) // rounded: no fused multiply-add
				order[k] = x.perm[at(l, k)]
			}
			// Insertion sort of (key, order): nearly sorted already.
			for i := 1; i < length; i++ {
				kk, v := keys[i], order[i]
				j := i - 1
				for j >= 0 && keys[j] > kk {
					keys[j+1], order[j+1] = keys[j], order[j]
					j--
				}
				keys[j+1], order[j+1] = kk, v
			}
			for k := 0; k < length; k++ {
				x.perm[at(l, k)] = order[k]
			}
		}
	}
	cols := g.Cols
	pass(g.Rows, g.Cols, func(l, k int) int { return l*cols + k })
	pass(g.Cols, g.Rows, func(l, k int) int { return k*cols + l })
}

func (p *Pipeline) apply(t int, src, dst *TokenSet, rec *FrameRecord) error {
	g, x := p.g, &p.x
	N, D, C := g.N(), g.D(), g.Channels
	if t < 0 {
		return fmt.Errorf("pipeline: step %d is negative", t)
	}
	if src.D != D || src.N != N || len(src.Data) < N*D || len(src.Pos) < N {
		return fmt.Errorf("pipeline: source has %d tokens of %d values, grid has %d of %d", src.N, src.D, N, D)
	}
	for i, p := range x.cells {
		if src.Pos[i] != p {
			return fmt.Errorf("pipeline: source token %d is not in grid order (cell %v)", i, src.Pos[i])
		}
	}
	capa := p.Capacity()
	if dst == src || dst.Cap() < capa || len(dst.Data) < capa*D {
		return fmt.Errorf("pipeline: destination has room for %d tokens, need %d (and must not be the source)", dst.Cap(), capa)
	}

	// 1. Photometric.
	base := src.Data[:N*D]
	if x.photo {
		p.photometric(t, base, x.work)
		base = x.work
	}

	// 2. Occlusion.
	var mean [3]float32
	if x.pr.occ != occNone {
		p.occlusion(t)
	} else {
		x.maskIdx = x.maskIdx[:0]
	}
	// Black tokens are written as zeros where the scramble puts them,
	// without a copy of the frame's tokens to clear them in.
	black := len(x.maskIdx) > 0 && x.pr.fill == fillBlack
	if len(x.maskIdx) > 0 && x.pr.fill != fillDrop && !black {
		if !x.photo {
			copy(x.work, base)
			base = x.work
		}
		switch x.pr.fill {
		case fillMean:
			var sum [3]float64
			for i, v := range base {
				sum[i%C] += float64(v)
			}
			for c := 0; c < C; c++ {
				mean[c] = float32(sum[c] / float64(N*D/C))
			}
			for _, j := range x.maskIdx {
				tok := base[j*D : (j+1)*D]
				for i := range tok {
					tok[i] = mean[i%C]
				}
			}
		case fillNoise:
			r := p.seedStream(keyFill, uint64(t))
			for _, j := range x.maskIdx {
				tok := base[j*D : (j+1)*D]
				for i := range tok {
					tok[i] = r.Float32()
				}
			}
		}
	}

	// 3. Scramble (and 4. drop).
	epoch := 0
	if p.spec.Every > 0 {
		epoch = t / p.spec.Every
	}
	p.scramble(epoch)
	drop := x.pr.fill == fillDrop && len(x.maskIdx) > 0
	npx := g.PatchW * g.PatchH
	k := 0
	for i := 0; i < N; i++ {
		j := x.perm[i]
		if drop && x.occ[j] {
			continue
		}
		out := dst.Data[k*D : (k+1)*D]
		in := base[j*D : (j+1)*D]
		o := x.orient[i]
		if black && x.occ[j] {
			clear(out) // turned or not, a black token is all zeros
		} else if o == 0 {
			copy(out, in)
		} else {
			m := x.omap[o][:npx]
			for dp, sp := range m {
				copy(out[dp*C:dp*C+C], in[int(sp)*C:int(sp)*C+C])
			}
		}
		dst.Pos[k] = x.cells[i]
		x.outPerm[k], x.outOri[k], x.outCell[k] = j, o, i
		k++
	}
	real := k

	// 5. Extra tokens.
	if n := p.spec.NoiseTokens; n > 0 {
		r := p.seedStream(keyNoiseTokens, uint64(t))
		for e := 0; e < n; e++ {
			out := dst.Data[k*D : (k+1)*D]
			for i := range out {
				out[i] = r.Float32()
			}
			dst.Pos[k] = NoCell
			x.outPerm[k], x.outOri[k] = -1, 0
			k++
		}
	}
	dups := 0
	if n := p.spec.Duplicates; n > 0 && real > 0 {
		r := p.seedStream(keyDuplicates, uint64(t))
		for e := 0; e < n; e++ {
			s := r.IntN(real)
			copy(dst.Data[k*D:(k+1)*D], dst.Data[s*D:(s+1)*D])
			dst.Pos[k] = dst.Pos[s]
			x.outPerm[k], x.outOri[k] = x.outPerm[s], x.outOri[s]
			k++
			dups++
		}
	}
	dst.N, dst.D = k, D

	if rec != nil {
		rec.Frame = t
		rec.Perm = append(rec.Perm[:0], x.outPerm[:k]...)
		rec.Orient = rec.Orient[:0]
		if x.orients > 1 {
			for _, o := range x.outOri[:k] {
				rec.Orient = append(rec.Orient, int(o))
			}
		}
		rec.Mask = append(rec.Mask[:0], x.maskIdx...)
		rec.Cells = rec.Cells[:0]
		if real < N {
			rec.Cells = append(rec.Cells, x.outCell[:real]...)
		}
		rec.Real, rec.Noise, rec.Dups = real, p.spec.NoiseTokens, dups
		rec.Epoch = epoch
		rec.Params = FrameParams{
			Brightness: p.spec.Brightness,
			Contrast:   p.spec.Contrast,
			Shift:      p.spec.Shift,
			PixelNoise: p.spec.PixelNoise,
			Mean:       mean,
		}
		if rec.Params.Contrast == 0 {
			rec.Params.Contrast = 1
		}
		rec.Offset = [2]int{}
		if p.corr != nil && p.corr.hasShift {
			rec.Offset = p.corr.frameOffset(p, t)
		}
	}
	return nil
}

// photometric writes the photometric transform of in into out:
//
//	v' = clamp01(v + float32((v−0.5)·(contrast−1)) + (brightness+shift[c]) + float32(σ·z))
//
// with z standard normal. Each product is rounded to float32 explicitly so
// that no machine fuses it into a multiply-add (which the Go spec allows
// otherwise): the bytes are the same everywhere.
func (p *Pipeline) photometric(t int, in, out []float32) {
	x := &p.x
	C := p.g.Channels
	var r *rand.Rand
	if x.sigma != 0 {
		r = p.seedStream(keyPixelNoise, uint64(t))
	}
	var spare float64
	have := false
	for i, v := range in {
		c := 0
		if C == 3 {
			c = i % 3
		}
		w := v + float32((v-0.5)*x.ctm1) + x.add[c]
		if r != nil {
			var z float64
			if have {
				z, have = spare, false
			} else {
				z, spare = normalPair(r)
				have = true
			}
			w += float32(x.sigma * z)
		}
		if w < 0 {
			w = 0
		} else if w > 1 {
			w = 1
		}
		out[i] = w
	}
}

package train

import (
	"math"

	"tilebench/games"
	"tilebench/patch"
)

// dataset holds the aggregated behaviour-cloning samples: each clean
// token set quantised back to the bytes it came from (lossless, since the
// tokenizer maps byte b to float32(b)/255), the previous action and the
// expert's label.
type dataset struct {
	size   int // token values per sample (N·D)
	adim   int // previous-action values per sample
	ldim   int // label values per sample
	n      int
	pix    []uint8
	prev   []float32
	label  []float32
	pos    []patch.Pos
	tokenN int
	sd     []float64 // per label dimension, from setSpread
	step   []int32   // each sample's step index within its episode
	classW []float64 // discrete: per-choice loss weight, from setSpread
}

// setClassWeights gives each discrete choice the weight n/(K·n_c) (n_c
// samples of K choices labelled c; "balanced" class weights, common
// practice), capped at 10, so that rare moves weigh as much as the
// frequent "stay".
func (ds *dataset) setClassWeights(k int) {
	count := make([]float64, k)
	for i := 0; i < ds.n; i++ {
		if c := int(ds.label[i*ds.ldim]); c >= 0 && c < k {
			count[c]++
		}
	}
	ds.classW = make([]float64, k)
	for c := range count {
		ds.classW[c] = 1
		if count[c] > 0 {
			ds.classW[c] = math.Min(10, float64(ds.n)/(float64(k)*count[c]))
		}
	}
}

// weight is the loss weight of choice c (1 before setClassWeights).
func (ds *dataset) weight(c int) float64 {
	if c < 0 || c >= len(ds.classW) {
		return 1
	}
	return ds.classW[c]
}

// setSpread computes each label dimension's standard deviation over the
// whole data set (called after every aggregation, before training).
func (ds *dataset) setSpread() {
	ds.sd = make([]float64, ds.ldim)
	if ds.n == 0 {
		return
	}
	for j := range ds.sd {
		var s, s2 float64
		for i := 0; i < ds.n; i++ {
			v := float64(ds.label[i*ds.ldim+j])
			s += v
			s2 += v * v
		}
		m := s / float64(ds.n)
		ds.sd[j] = math.Sqrt(math.Max(0, s2/float64(ds.n)-m*m))
	}
}

// spread is the scale of label dimension j in the loss: its standard
// deviation, floored at 2% of the action range (so a constant label does
// not blow the loss up), or the range itself before setSpread.
func (ds *dataset) spread(j int, space games.Controls) float64 {
	r := space.High[j] - space.Low[j]
	if len(ds.sd) <= j {
		return r
	}
	return math.Max(ds.sd[j], 0.02*r)
}

var unit = func() (u [256]float32) {
	for i := range u {
		u[i] = float32(i) / 255
	}
	return
}()

func newDataset(grid *patch.Grid, adim, ldim int) *dataset {
	ds := &dataset{size: grid.N() * grid.D(), adim: adim, ldim: ldim, tokenN: grid.N()}
	ds.pos = make([]patch.Pos, grid.N())
	for i := range ds.pos {
		ds.pos[i] = grid.Cell(i)
	}
	return ds
}

func (ds *dataset) add(step int, tokens []float32, prev, label []float64) {
	ds.step = append(ds.step, int32(step))
	for _, v := range tokens {
		ds.pix = append(ds.pix, uint8(v*255+0.5))
	}
	for _, v := range prev {
		ds.prev = append(ds.prev, float32(v))
	}
	for _, v := range label {
		ds.label = append(ds.label, float32(v))
	}
	ds.n++
}

// load writes sample i into ts (a full grid-order token set) and prev.
func (ds *dataset) load(i int, ts *patch.TokenSet, prev []float64) {
	src := ds.pix[i*ds.size : (i+1)*ds.size]
	dst := ts.Data[:ds.size]
	for j, b := range src {
		dst[j] = unit[b]
	}
	ts.N = ds.tokenN
	copy(ts.Pos, ds.pos)
	for j := range prev {
		prev[j] = float64(ds.prev[i*ds.adim+j])
	}
}

func (ds *dataset) labels(i int) []float32 { return ds.label[i*ds.ldim : (i+1)*ds.ldim] }

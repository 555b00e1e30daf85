package nets

import (
	"math"
	"testing"

	"tilebench/vision"
)

// refWeights computes P = softmax(Q·Kᵀ/√d) in float64 from the net's own
// tensors, with the formula of Vaswani et al. 2017 §3.2.1: Q = PE·Wq, the
// keys K = X·Wk + b (plus the cell's embedding for posattention). Only
// for nets without a key hidden layer, context 1, no previous action and
// no centring.
func refWeights(t *testing.T, n Net, obs *vision.Observation) [][]float64 {
	t.Helper()
	cfg := n.Config()
	tensors := map[string][]float32{}
	for _, ts := range n.Tensors() {
		tensors[ts.Name] = ts.Data
	}
	d, m, qd := cfg.KeySize, cfg.Queries, cfg.QueryDim
	din := n.Grid().D()
	pe := PositionalEncoding(m, qd)
	wq, wk, bk := tensors["query.proj"], tensors["key.weight"], tensors["key.bias"]
	emb := tensors["pos.embed"]
	ts := obs.Tokens
	keys := make([][]float64, ts.N)
	for j := range keys {
		keys[j] = make([]float64, d)
		for c := 0; c < d; c++ {
			s := float64(bk[c])
			for i := 0; i < din; i++ {
				s += float64(ts.Data[j*din+i]) * float64(wk[i*d+c])
			}
			if emb != nil {
				s += float64(emb[n.Grid().Index(ts.Pos[j])*d+c])
			}
			keys[j][c] = s
		}
	}
	p := make([][]float64, m)
	for q := 0; q < m; q++ {
		qv := make([]float64, d)
		for c := 0; c < d; c++ {
			for i := 0; i < qd; i++ {
				qv[c] += float64(pe[q*qd+i]) * float64(wq[i*d+c])
			}
		}
		row := make([]float64, ts.N)
		mx := math.Inf(-1)
		for j := range row {
			for c := 0; c < d; c++ {
				row[j] += qv[c] * keys[j][c]
			}
			row[j] /= math.Sqrt(float64(d))
			mx = math.Max(mx, row[j])
		}
		var s float64
		for j := range row {
			row[j] = math.Exp(row[j] - mx)
			s += row[j]
		}
		for j := range row {
			row[j] /= s
		}
		p[q] = row
	}
	return p
}

func TestTokenWeightsMatchFormula(t *testing.T) {
	g := testGrid(t, 32, 24, 8)
	for _, fam := range []string{Attention, PosAttention} {
		n := mustNew(t, Config{Family: fam, KeySize: 8, Queries: 5, QueryDim: 6, Value: "identity"}, g, contSpace, 3)
		rep := n.(vision.AttentionReporter)
		obs := randomObs(g, 9, 3)
		sum := make([]float32, obs.Tokens.Cap())
		if _, _, ok := rep.TokenWeights(sum, nil); ok {
			t.Fatalf("%s: weights before any step", fam)
		}
		action := make([]float64, 3)
		if err := n.Act(obs, action); err != nil {
			t.Fatal(err)
		}
		pq := make([]float32, 5*obs.Tokens.N)
		m, nt, ok := rep.TokenWeights(sum, pq)
		if !ok || m != 5 || nt != obs.Tokens.N {
			t.Fatalf("%s: TokenWeights = %d, %d, %v; want 5, %d, true", fam, m, nt, ok, obs.Tokens.N)
		}
		ref := refWeights(t, n, obs)
		for j := 0; j < nt; j++ {
			var s float64
			for q := 0; q < m; q++ {
				got, want := float64(pq[q*nt+j]), ref[q][j]
				if math.Abs(got-want) > 1e-5 {
					t.Fatalf("%s: query %d token %d: weight %v, formula %v", fam, q, j, got, want)
				}
				s += want
			}
			if math.Abs(float64(sum[j])-s) > 1e-5 {
				t.Fatalf("%s: token %d: summed weight %v, formula %v", fam, j, sum[j], s)
			}
		}
		// A backward pass normalises P in place; the weights stay the same.
		n.Backward(make([]float32, n.OutputDim()))
		sum2 := make([]float32, nt)
		rep.TokenWeights(sum2, nil)
		for j := range sum2 {
			if math.Abs(float64(sum2[j]-sum[j])) > 1e-6 {
				t.Fatalf("%s: token %d weight %v after backward, %v before", fam, j, sum2[j], sum[j])
			}
		}
		if _, _, ok := rep.TokenWeights(sum[:nt-1], nil); ok {
			t.Fatalf("%s: a short buffer was accepted", fam)
		}
		n.Reset(1)
		if _, _, ok := rep.TokenWeights(sum, nil); ok {
			t.Fatalf("%s: weights survived Reset", fam)
		}
	}
}

// Set attention is permutation invariant: permuting the tokens permutes
// their weights.
func TestTokenWeightsFollowPermutation(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	n := mustNew(t, Config{Family: Attention}, g, contSpace, 5)
	rep := n.(vision.AttentionReporter)
	obs := randomObs(g, 2, 3)
	action := make([]float64, 3)
	if err := n.Act(obs, action); err != nil {
		t.Fatal(err)
	}
	N, D := obs.Tokens.N, obs.Tokens.D
	before := make([]float32, N)
	rep.TokenWeights(before, nil)
	perm := testRand(4).Perm(N)
	shuf := randomObs(g, 2, 3)
	for i, j := range perm {
		copy(shuf.Tokens.Data[i*D:(i+1)*D], obs.Tokens.Data[j*D:(j+1)*D])
		shuf.Tokens.Pos[i] = obs.Tokens.Pos[j]
	}
	if err := n.Act(shuf, action); err != nil {
		t.Fatal(err)
	}
	after := make([]float32, N)
	rep.TokenWeights(after, nil)
	for i, j := range perm {
		if math.Abs(float64(after[i]-before[j])) > 1e-5 {
			t.Fatalf("token %d (was %d): weight %v, before %v", i, j, after[i], before[j])
		}
	}
}

func TestTokenWeightsDoNotAllocate(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	n := mustNew(t, Config{Family: Attention}, g, contSpace, 5)
	rep := n.(vision.AttentionReporter)
	obs := randomObs(g, 2, 3)
	action := make([]float64, 3)
	sum := make([]float32, obs.Tokens.Cap())
	pq := make([]float32, 16*obs.Tokens.Cap())
	allocs := testing.AllocsPerRun(50, func() {
		n.Act(obs, action)
		rep.TokenWeights(sum, pq)
	})
	if allocs != 0 {
		t.Fatalf("%v allocations per step with weights read", allocs)
	}
}

func BenchmarkAttentionActWithWeights(b *testing.B) {
	g := testGrid(b, 112, 80, 8)
	n := mustNew(b, Config{Family: Attention}, g, contSpace, 1)
	rep := n.(vision.AttentionReporter)
	obs := randomObs(g, 2, 3)
	action := make([]float64, 3)
	sum := make([]float32, obs.Tokens.Cap())
	b.ReportAllocs()
	for b.Loop() {
		if err := n.Act(obs, action); err != nil {
			b.Fatal(err)
		}
		rep.TokenWeights(sum, nil)
	}
}

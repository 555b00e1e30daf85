package nets

import (
	"testing"

	"tilebench/games"
)

// The cost model's FLOP count must equal twice the multiply-adds that an
// instrumented forward pass performs (2·m·k·n per product, Golub & Van
// Loan §1.1): the counting kernels add one per multiply-add in their
// innermost loops.
func TestEstimateFLOPsMatchInstrumentedForward(t *testing.T) {
	saved := kern
	defer func() { kern = saved }()
	for _, p := range []int{4, 8, 12, 16} {
		g := testGrid(t, 48, 48, p)
		configs := append([]struct {
			name string
			cfg  Config
		}{{"default", Config{}}, {"pos-default", Config{Family: PosAttention}}, {"meanpool-default", Config{Family: MeanPool}}, {"mlp-default", Config{Family: MLP}}}, smallConfigs...)
		for _, sc := range configs {
			for _, sp := range []games.Controls{contSpace, discSpace} {
				c, err := Estimate(sc.cfg, g, sp)
				if err != nil {
					t.Fatal(err)
				}
				n := mustNew(t, sc.cfg, g, sp, 1)
				var macs int64
				kern = countingKernels(&macs)
				out := make([]float32, n.OutputDim())
				if err := n.Forward(randomObs(g, 2, sp.Dim()), out); err != nil {
					t.Fatal(err)
				}
				kern = saved
				if c.FLOPs != 2*macs {
					t.Errorf("patch %d %s %s: estimate %d FLOPs, instrumented forward did %d multiply-adds (= %d FLOPs)", p, sc.name, sp.Kind, c.FLOPs, macs, 2*macs)
				}
				if c.Params != len(n.Params()) {
					t.Errorf("%s: estimate %d params, net has %d", sc.name, c.Params, len(n.Params()))
				}
				sum := 0
				for _, l := range c.Layers {
					sum += l.Params
				}
				if sum != c.Params {
					t.Errorf("%s: layer params sum to %d, total %d", sc.name, sum, c.Params)
				}
			}
		}
	}
}

// The default policy on 112×80×3 frames at patch 8 (14×10 = 140 tokens
// of 8·8·3 = 192 values), worked out by hand: key 140·192·16, value
// 140·192·16, query projection 16·16·16, attention 16·16·140 + 16·140·16,
// head 256·32 + 32·3 multiply-adds.
func TestEstimateDefaultByHand(t *testing.T) {
	g := testGrid(t, 112, 80, 8)
	c, err := Estimate(Config{}, g, contSpace)
	if err != nil {
		t.Fatal(err)
	}
	macs := int64(140*192*16 + 140*192*16 + 16*16*16 + 16*16*140 + 16*140*16 + 256*32 + 32*3)
	params := (192*16+16)*2 /* key, value */ + 16*16 /* query.proj */ + 256*32 + 32 + 32*3 + 3
	if c.FLOPs != 2*macs || c.Params != params || c.Tokens != 140 || c.TokenDim != 192 {
		t.Errorf("default cost %+v: want %d FLOPs, %d params, 140 tokens of 192", c, 2*macs, params)
	}
}

func TestMeasureLatency(t *testing.T) {
	g := testGrid(t, 32, 32, 8)
	n := mustNew(t, Config{}, g, contSpace, 1)
	d, err := MeasureLatency(n, RandomObservation(g, contSpace, 1), 3, 5)
	if err != nil || d <= 0 {
		t.Fatalf("latency %v, %v", d, err)
	}
	if _, err := MeasureLatency(n, RandomObservation(g, contSpace, 1), 0, 5); err == nil {
		t.Error("zero samples accepted")
	}
}

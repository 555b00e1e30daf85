package train

import (
	"encoding/json"
	"math"
	"os"
	"testing"

	"tilebench/internal/reftest"
)

type adamGolden struct {
	Format int `json:"format"`
	Cases  []struct {
		LR          float64     `json:"lr"`
		WeightDecay float64     `json:"weight_decay"`
		A           []float64   `json:"a"`
		C           []float64   `json:"c"`
		X0          []float64   `json:"x0"`
		Steps       [][]float64 `json:"steps"`
	} `json:"cases"`
}

// checkAdam runs our Adam on the golden file's quadratics and compares
// every step with torch.optim.Adam's (testdata/ref/adam_ref.py).
func checkAdam(t *testing.T, data []byte) {
	t.Helper()
	var g adamGolden
	if err := json.Unmarshal(data, &g); err != nil {
		t.Fatal(err)
	}
	if g.Format != 1 || len(g.Cases) == 0 {
		t.Fatalf("golden file: format %d, %d cases", g.Format, len(g.Cases))
	}
	for ci, c := range g.Cases {
		opt := Adam{LR: c.LR, WeightDecay: c.WeightDecay} // betas and eps at their defaults
		x := make([]float32, len(c.X0))
		for i, v := range c.X0 {
			x[i] = float32(v)
		}
		grad := make([]float32, len(x))
		for s, want := range c.Steps {
			for i := range x {
				grad[i] = float32(c.A[i]) * (x[i] - float32(c.C[i]))
			}
			opt.Step(x, grad)
			for i := range x {
				// float32 arithmetic in torch, float64 inside ours:
				// agree to a few float32 ulps.
				if d := math.Abs(float64(x[i]) - want[i]); d > 2e-6*math.Max(1, math.Abs(want[i])) {
					t.Fatalf("case %d step %d x[%d] = %.9g, torch.optim.Adam %.9g", ci, s+1, i, x[i], want[i])
				}
			}
		}
	}
}

// TestAdamMatchesTorchGolden checks against the committed output of
// testdata/ref/adam_ref.py (torch.optim.Adam, Debian python3-torch).
func TestAdamMatchesTorchGolden(t *testing.T) {
	data, err := os.ReadFile("testdata/adam_golden.json")
	if err != nil {
		t.Fatal(err)
	}
	checkAdam(t, data)
}

// TestRefAdam runs the reference script live.
func TestRefAdam(t *testing.T) {
	reftest.Need(t, "torch")
	checkAdam(t, reftest.Run(t, "adam_ref.py"))
}

// TestAdamFirstStepIsLR checks the property of Kingma & Ba 2015 §2.1:
// with bias correction the first step has magnitude ≈ LR in every
// coordinate whatever the gradient's scale.
func TestAdamFirstStepIsLR(t *testing.T) {
	x := []float32{0, 0, 0}
	opt := Adam{LR: 0.01}
	opt.Step(x, []float32{1e-3, -5, 300})
	for i, want := range []float32{-0.01, 0.01, -0.01} {
		if math.Abs(float64(x[i]-want)) > 1e-6 {
			t.Fatalf("x[%d] = %v, want %v", i, x[i], want)
		}
	}
}

func TestAdamCheck(t *testing.T) {
	for _, a := range []Adam{{LR: -1}, {Beta1: 1}, {Beta2: 1.5}, {Eps: -1}, {WeightDecay: math.NaN()}} {
		if a.Check() == nil {
			t.Errorf("%+v accepted", a)
		}
	}
	if err := (&Adam{}).Check(); err != nil {
		t.Fatal(err)
	}
}

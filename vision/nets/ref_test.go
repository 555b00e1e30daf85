package nets

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tilebench/games"
	"tilebench/internal/reftest"
	"tilebench/patch"
	"tilebench/vision"
)

// refFile is the output of testdata/ref/nets_ref.py: weights, inputs and
// float64 PyTorch outputs for attention, posattention and meanpool.
type refFile struct {
	Format int `json:"format"`
	Cases  []struct {
		Name   string `json:"name"`
		Config struct {
			Family      string `json:"family"`
			KeySize     int    `json:"key_size"`
			KeyHidden   int    `json:"key_hidden"`
			Value       string `json:"value"`
			ValueSize   int    `json:"value_size"`
			Queries     int    `json:"queries"`
			QueryDim    int    `json:"query_dim"`
			Hidden      int    `json:"hidden"`
			TokenHidden int    `json:"token_hidden"`
			PrevAction  bool   `json:"prev_action"`
			Context     int    `json:"context"`
			Centre      bool   `json:"centre"`
		} `json:"config"`
		Grid struct {
			Width, Height, Patch int
		} `json:"grid"`
		Action struct {
			Kind  string    `json:"kind"`
			Names []string  `json:"names"`
			Low   []float64 `json:"low"`
			High  []float64 `json:"high"`
		} `json:"action"`
		Tensors []struct {
			Name  string    `json:"name"`
			Shape []int     `json:"shape"`
			Data  []float64 `json:"data"`
		} `json:"tensors"`
		Steps []struct {
			Tokens []float64  `json:"tokens"`
			Pos    [][2]int16 `json:"pos"`
			Prev   []float64  `json:"prev"`
		} `json:"steps"`
		Outputs [][]float64 `json:"outputs"`
	} `json:"cases"`
}

// refTolerance: the reference computes in float64 from the same float32
// weights and inputs; tilebench computes in float32. Each output passes
// through about five layers whose sums have at most ~200 terms of size
// O(1), so float32 rounding (2^-24 ≈ 6e-8 relative per operation) leaves
// errors near 1e-6; 2e-5 absolute leaves room and still catches any
// wrong formula, which moves outputs by ≥ 1e-2.
const refTolerance = 2e-5

// checkRef runs every case of data through the Go families.
func checkRef(t *testing.T, data []byte) {
	var rf refFile
	if err := json.Unmarshal(data, &rf); err != nil {
		t.Fatal(err)
	}
	if rf.Format != 1 || len(rf.Cases) < 6 {
		t.Fatalf("reference file: format %d, %d cases", rf.Format, len(rf.Cases))
	}
	seen := map[string]bool{}
	for _, c := range rf.Cases {
		cf := c.Config
		cfg := Config{Family: cf.Family, KeySize: cf.KeySize, KeyHidden: cf.KeyHidden, Value: cf.Value, ValueSize: cf.ValueSize,
			Queries: cf.Queries, QueryDim: cf.QueryDim, Hidden: cf.Hidden, TokenHidden: cf.TokenHidden, PrevAction: cf.PrevAction, Context: cf.Context, Centre: cf.Centre}
		seen[cf.Family] = true
		seen["centre"] = seen["centre"] || cf.Centre
		g, err := patch.NewGrid(patch.GridConfig{Width: c.Grid.Width, Height: c.Grid.Height, PatchW: c.Grid.Patch})
		if err != nil {
			t.Fatal(err)
		}
		sp := games.Controls{Kind: games.Continuous, Names: c.Action.Names, Low: c.Action.Low, High: c.Action.High}
		if c.Action.Kind == "discrete" {
			sp = games.Controls{Kind: games.Discrete, Names: c.Action.Names}
		}
		n, err := build(cfg, g, sp)
		if err != nil {
			t.Fatalf("%s: %v", c.Name, err)
		}
		// Same names, shapes and order as docs/families.md says.
		specs := n.base().specs
		if len(specs) != len(c.Tensors) {
			t.Fatalf("%s: net has %d tensors, reference %d", c.Name, len(specs), len(c.Tensors))
		}
		for i, s := range specs {
			rt := c.Tensors[i]
			if rt.Name != s.name || len(rt.Shape) != len(s.shape) || len(rt.Data) != s.size {
				t.Fatalf("%s: tensor %d is %s %v, reference %s %v", c.Name, i, s.name, s.shape, rt.Name, rt.Shape)
			}
			for j := range s.shape {
				if rt.Shape[j] != s.shape[j] {
					t.Fatalf("%s: tensor %s shape %v, reference %v", c.Name, s.name, s.shape, rt.Shape)
				}
			}
			for j, v := range rt.Data {
				n.Params()[s.off+j] = float32(v)
			}
		}
		out := make([]float32, n.OutputDim())
		worst := 0.0
		for si, st := range c.Steps {
			ts := patch.NewTokenSet(len(st.Pos), g.D())
			ts.N = len(st.Pos)
			for i, v := range st.Tokens {
				ts.Data[i] = float32(v)
			}
			for i, p := range st.Pos {
				ts.Pos[i] = patch.Pos{Row: p[0], Col: p[1]}
			}
			obs := &vision.Observation{Tokens: ts, Grid: g, PrevAction: st.Prev, Step: si}
			if err := n.Forward(obs, out); err != nil {
				t.Fatalf("%s step %d: %v", c.Name, si, err)
			}
			for j, want := range c.Outputs[si] {
				d := math.Abs(float64(out[j]) - want)
				worst = math.Max(worst, d)
				if d > refTolerance {
					t.Errorf("%s step %d output %d: Go %.7g, torch %.7g", c.Name, si, j, out[j], want)
				}
			}
		}
		t.Logf("%s: worst |Go − torch| %.2g over %d steps", c.Name, worst, len(c.Steps))
	}
	if !seen["centre"] {
		t.Errorf("reference file has no case with centring")
	}
	for _, fam := range []string{Attention, PosAttention, MeanPool} {
		if !seen[fam] {
			t.Errorf("reference file has no %s case", fam)
		}
	}
}

// TestNetsGolden checks the families against the committed PyTorch
// outputs (testdata/ref/nets_ref.json, made by nets_ref.py).
func TestNetsGolden(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(reftest.Root(), "testdata", "ref", "nets_ref.json"))
	if err != nil {
		t.Fatal(err)
	}
	checkRef(t, data)
}

// TestRefNetsTorch runs nets_ref.py live with Debian's python3-torch.
func TestRefNetsTorch(t *testing.T) {
	if testing.Short() {
		t.Skip("live torch reference skipped in -short mode")
	}
	reftest.Need(t, "torch", "numpy")
	checkRef(t, reftest.Run(t, "nets_ref.py"))
}

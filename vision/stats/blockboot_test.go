package stats

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"testing"

	"tilebench/internal/reftest"
)

type blockRef struct {
	MovingBlock []struct {
		X         []float64 `json:"x"`
		Block     int       `json:"block"`
		Lo, Hi    float64
		SD        float64  `json:"sd"`
		ExactMean *float64 `json:"exact_mean"`
		ExactVar  *float64 `json:"exact_var"`
	} `json:"moving_block"`
	WholeSequence []struct {
		Seqs   [][]float64 `json:"seqs"`
		Value  float64     `json:"value"`
		Lo, Hi float64
		SD     float64 `json:"sd"`
	} `json:"whole_sequence"`
}

func binary(xs ...[]float64) bool {
	for _, x := range xs {
		for _, v := range x {
			if v != 0 && v != 1 {
				return false
			}
		}
	}
	return true
}

// checkBlockRef compares the Go bootstraps with NumPy's (testdata/ref/
// blockboot_ref.py, 200000 resamples): the percentile ends within a tenth
// of the bootstrap standard deviation (plus one step of the statistic for
// 0/1 data, whose bootstrap distribution is discrete), and, where l
// divides n, the mean and variance of the Go replicates against the exact
// moving-block moments of Künsch 1989.
func checkBlockRef(t *testing.T, data []byte) {
	t.Helper()
	var ref blockRef
	if err := json.Unmarshal(data, &ref); err != nil {
		t.Fatal(err)
	}
	if len(ref.MovingBlock) == 0 || len(ref.WholeSequence) == 0 {
		t.Fatal("reference holds no cases")
	}
	const B = 40000
	b := Bootstrap{Resamples: B, Seed: 7}
	for i, c := range ref.MovingBlock {
		e, err := b.MovingBlockMean(c.X, c.Block)
		if err != nil {
			t.Fatal(err)
		}
		tol := 0.1 * c.SD
		if binary(c.X) {
			tol += 1.0 / float64(len(c.X))
		}
		if math.Abs(e.Lo-c.Lo) > tol || math.Abs(e.Hi-c.Hi) > tol {
			t.Errorf("moving block %d: [%v, %v], numpy [%v, %v] (tolerance %v)", i, e.Lo, e.Hi, c.Lo, c.Hi, tol)
		}
		if math.Abs(e.Value-Mean(c.X)) > 1e-12 {
			t.Errorf("moving block %d: value %v, want the mean %v", i, e.Value, Mean(c.X))
		}
		if c.ExactMean != nil {
			theta, _, _ := b.blockReplicates(c.X, c.Block)
			m, v := Mean(theta), 0.0
			for _, th := range theta {
				v += (th - m) * (th - m)
			}
			v /= float64(len(theta))
			// Monte Carlo error: the mean within 4 standard errors, the
			// variance within 4·sqrt(2/B) relative (normal theory).
			if se := math.Sqrt(*c.ExactVar / B); math.Abs(m-*c.ExactMean) > 4*se {
				t.Errorf("moving block %d: replicate mean %v, exact %v (se %v)", i, m, *c.ExactMean, se)
			}
			if rel := math.Abs(v / *c.ExactVar - 1); rel > 4*math.Sqrt(2.0/B) {
				t.Errorf("moving block %d: replicate variance %v, exact %v (rel %v)", i, v, *c.ExactVar, rel)
			}
		}
	}
	for i, c := range ref.WholeSequence {
		e, err := b.WholeSequenceMean(Sequences(c.Seqs))
		if err != nil {
			t.Fatal(err)
		}
		tol := 0.1 * c.SD
		if binary(c.Seqs...) {
			tol += 1.0 / float64(Sequences(c.Seqs).Frames())
		}
		if math.Abs(e.Value-c.Value) > 1e-12 {
			t.Errorf("whole sequence %d: value %v, numpy %v", i, e.Value, c.Value)
		}
		if math.Abs(e.Lo-c.Lo) > tol || math.Abs(e.Hi-c.Hi) > tol {
			t.Errorf("whole sequence %d: [%v, %v], numpy [%v, %v] (tolerance %v)", i, e.Lo, e.Hi, c.Lo, c.Hi, tol)
		}
	}
}

func TestBlockBootstrapGolden(t *testing.T) {
	data, err := os.ReadFile(filepath.Join(reftest.Root(), "testdata", "ref", "blockboot_ref.json"))
	if err != nil {
		t.Fatal(err)
	}
	checkBlockRef(t, data)
}

// TestRefBlockBootstrap runs testdata/ref/blockboot_ref.py live.
func TestRefBlockBootstrap(t *testing.T) {
	reftest.Need(t, "numpy")
	checkBlockRef(t, reftest.Run(t, "blockboot_ref.py"))
}

func TestSequenceMeanMethod(t *testing.T) {
	few := Sequences{{1, 2, 3, 4}, {2, 2}}
	if _, m, err := (Bootstrap{Resamples: 200}).SequenceMean(few); err != nil || m != MethodMovingBlock {
		t.Errorf("2 sequences: %q %v", m, err)
	}
	var many Sequences
	for i := 0; i < MinWholeSequences; i++ {
		many = append(many, []float64{float64(i), 1})
	}
	e, m, err := (Bootstrap{Resamples: 200}).SequenceMean(many)
	if err != nil || m != MethodWholeSequence {
		t.Errorf("%d sequences: %q %v", MinWholeSequences, m, err)
	}
	if !(e.Lo <= e.Value && e.Value <= e.Hi) {
		t.Errorf("interval %v does not hold the value", e)
	}
	// Constant data: a degenerate interval at the constant.
	e, err = (Bootstrap{Resamples: 200}).MovingBlockMean([]float64{0.5, 0.5, 0.5, 0.5, 0.5}, 2)
	if err != nil || e.Lo != 0.5 || e.Hi != 0.5 {
		t.Errorf("constant: %v %v", e, err)
	}
	if _, err := (Bootstrap{}).MovingBlockMean(nil, 3); err == nil {
		t.Error("no frames: no error")
	}
	if _, err := (Bootstrap{}).MovingBlockMean([]float64{1, math.NaN()}, 1); err == nil {
		t.Error("NaN: no error")
	}
}

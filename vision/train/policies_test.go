package train

import (
	"encoding/json"
	"maps"
	"math"
	"path/filepath"
	"slices"
	"strconv"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/vision/nets"
	"tilebench/vision/weights"
)

// TestShippedPolicies re-evaluates every reference policy in
// testdata/policies on its first held-out episodes and checks the
// returns recorded in the file when testdata/policies/train.sh trained it
// (exact on the machine that trained them; the tolerance, 2% of the
// recorded mean's magnitude plus 1, allows for another CPU's float32
// kernels steering a closed-loop episode slightly differently), and that
// the recorded mean is the mean of the recorded returns.
func TestShippedPolicies(t *testing.T) {
	files, err := filepath.Glob(filepath.Join(reftest.Root(), "testdata", "policies", "*.safetensors"))
	if err != nil {
		t.Fatal(err)
	}
	if len(files) < 12 {
		t.Fatalf("%d reference policies in testdata/policies, want 12 (2 families × 2 games × 3 patch sizes)", len(files))
	}
	episodes := 2
	if testing.Short() {
		episodes = 1
	}
	for _, path := range files {
		t.Run(filepath.Base(path), func(t *testing.T) {
			f, err := weights.ReadFile(path)
			if err != nil {
				t.Fatal(err)
			}
			net, err := nets.FromFile(f)
			if err != nil {
				t.Fatal(err)
			}
			game, _ := f.Meta(weights.KeyGame)
			seedS, _ := f.Meta(weights.KeySeed)
			seed, err := strconv.ParseUint(seedS, 10, 64)
			if err != nil {
				t.Fatalf("seed %q: %v", seedS, err)
			}
			var rec []float64
			rs, _ := f.Meta("heldout_returns")
			if err := json.Unmarshal([]byte(rs), &rec); err != nil || len(rec) < 50 {
				t.Fatalf("recorded held-out returns %q: %v (want ≥ 50)", rs, err)
			}
			score, err := f.MetaFloat(weights.KeyHeldOutScore)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(mean(rec)-score) > 1e-9*math.Max(1, math.Abs(score)) {
				t.Fatalf("recorded score %v is not the mean %v of the recorded returns", score, mean(rec))
			}
			got, err := HeldOutReturns(net, game, f.Metadata["variation"], seed, 0, episodes, 0)
			if err != nil {
				t.Fatal(err)
			}
			tol := 0.02*math.Abs(score) + 1
			for i, g := range got {
				if math.Abs(g-rec[i]) > tol {
					t.Errorf("held-out episode %d: return %.3f, recorded %.3f (tolerance %.3g)", i, g, rec[i], tol)
				}
			}
		})
	}
}

// The shipped references meet the training targets, by the scores
// recorded in them (50 held-out episodes; TestShippedPolicies checks that
// the files still play as recorded): the set-attention policy at patch 8
// on drive at least 85% of the expert's mean return, every other drive
// policy at least 80%, and every paddle policy at least 90% of the
// expert's.
func TestShippedPoliciesMeetTargets(t *testing.T) {
	targets := map[string]float64{}
	for _, fam := range []string{"attention", "posattention"} {
		for _, p := range []string{"4", "8", "16"} {
			targets["drive-"+fam+"-p"+p] = 0.8
		}
	}
	targets["drive-attention-p8"] = 0.85
	for _, fam := range []string{"attention", "posattention"} {
		for _, p := range []string{"5", "10", "20"} {
			targets["paddle-"+fam+"-p"+p] = 0.9
		}
	}
	for _, name := range slices.Sorted(maps.Keys(targets)) {
		frac := targets[name]
		f, err := weights.ReadFile(filepath.Join(reftest.Root(), "testdata", "policies", name+".safetensors"))
		if err != nil {
			t.Fatal(err)
		}
		score, err := f.MetaFloat(weights.KeyHeldOutScore)
		if err != nil {
			t.Fatal(err)
		}
		expert, err := f.MetaFloat("heldout_expert_score")
		if err != nil {
			t.Fatal(err)
		}
		n, err := f.MetaInt(weights.KeyHeldOutEpisodes)
		if err != nil {
			t.Fatal(err)
		}
		t.Logf("%s: %.2f against the expert's %.2f (%.1f%%) over %d episodes", name, score, expert, 100*score/expert, n)
		if n < 50 || !(expert > 0) || score < frac*expert {
			t.Errorf("%s: held-out mean %.2f over %d episodes, want ≥ %.0f%% of the expert's %.2f over ≥ 50", name, score, n, 100*frac, expert)
		}
	}
}

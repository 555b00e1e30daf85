package runner

import (
	"bytes"
	"context"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/internal/reftest"
	"tilebench/internal/seeds"
	"tilebench/vision/policies"
	"tilebench/vision/stats"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
	"tilebench/vision/weights"
)

// refPolicy is the shipped driving reference at patch 8.
func refPolicy() string {
	return filepath.Join(reftest.Root(), "testdata", "policies", "drive-attention-p8.safetensors")
}

// comparePlan is a small study of the driving game comparing the given
// policies clean and under random occlusion.
func comparePlan(t *testing.T, episodes int, list ...policies.Labelled) *study.Plan {
	t.Helper()
	p, err := study.NewPlan(study.Definition{Name: "cmp", Game: "drive", Episodes: episodes, Seed: 5, Policies: list,
		Patch: study.Axis{"8"}, Axes: study.Axes{Occlude: study.Axis{"random:0.3,random:0.6"}},
		Stats: study.StatsDef{Resamples: 400}, Strips: []int{0}})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func runCompare(t *testing.T, p *study.Plan, dir string, opt Options) *analysis.Analysis {
	t.Helper()
	opt.Dir = dir
	if opt.Env == nil {
		opt.Env = DefaultEnv(p, "")
	}
	out, err := Run(context.Background(), p, opt)
	if err != nil {
		t.Fatal(err)
	}
	if out.Failed != 0 {
		t.Fatalf("%d failed episodes", out.Failed)
	}
	return out.Analysis
}

// weakened writes a copy of the reference policy with Gaussian noise of
// sd times each tensor's own standard deviation added to every weight.
func weakened(t *testing.T, sd float64) string {
	t.Helper()
	f, err := weights.ReadFile(refPolicy())
	if err != nil {
		t.Fatal(err)
	}
	r := seeds.NewRand(11)
	for k := range f.Tensors {
		x := f.Tensors[k].Data
		v := make([]float64, len(x))
		for i, w := range x {
			v[i] = float64(w)
		}
		s := stats.StdDev(v)
		for i := range x {
			x[i] += float32(sd * s * r.NormFloat64())
		}
	}
	path := filepath.Join(t.TempDir(), "noisy.safetensors")
	if err := weights.WriteFile(path, f); err != nil {
		t.Fatal(err)
	}
	return path
}

// Two labels for one weights file: both play the same seeds (common
// random numbers by construction of Plan.PipeSeed and GameSeed), so every
// episode's return is the same and the paired interval of A − A is
// exactly [0, 0] in every condition, for the score and for the retention
// (every bootstrap replicate draws the same seeds for both arms).
func TestCompareSamePolicyIsExactlyZero(t *testing.T) {
	p := comparePlan(t, 5, policies.Labelled{Label: "a", Source: refPolicy()}, policies.Labelled{Label: "b", Source: refPolicy()})
	if len(p.Cells) != 6 {
		t.Fatalf("%d cells, want 3 conditions × 2 policies", len(p.Cells))
	}
	a := runCompare(t, p, t.TempDir(), Options{Workers: 1})
	if len(a.Diffs) != 3 {
		t.Fatalf("%d differences, want one per condition", len(a.Diffs))
	}
	for _, pd := range a.Diffs {
		for e := range p.Def.Episodes {
			if p.PipeSeed(pd.CellA, e) != p.PipeSeed(pd.CellB, e) {
				t.Fatalf("%s: episode %d has different pipeline seeds for a and b", pd.Label, e)
			}
			if x, y := a.Cells[pd.CellA].ByEpisode[e], a.Cells[pd.CellB].ByEpisode[e]; x != y {
				t.Fatalf("%s: episode %d returns %v and %v for one policy", pd.Label, e, x, y)
			}
		}
		if pd.Score == nil {
			t.Fatalf("%s: no score difference (%s)", pd.Label, pd.Note)
		}
		if d := pd.Score.Diff; d.Value != 0 || d.Lo != 0 || d.Hi != 0 {
			t.Errorf("%s: A − A = %v, want exactly 0 [0, 0]", pd.Label, d)
		}
		if pd.Score.Test.P != 1 {
			t.Errorf("%s: signed-rank p %v, want 1 (no non-zero difference)", pd.Label, pd.Score.Test.P)
		}
		if a.Plan.Reference(pd.CellA) == pd.CellA {
			continue
		}
		if r := pd.Retention; r == nil || r.Value != 0 || r.Lo != 0 || r.Hi != 0 {
			t.Errorf("%s: retention A − A = %v (%s), want exactly 0 [0, 0]", pd.Label, r, pd.Note)
		}
	}
	if len(a.Verdicts) != 1 || a.Verdicts[0].More != "" || !strings.Contains(a.Verdicts[0].Statement, "no difference") {
		t.Fatalf("verdicts %+v, want one saying no difference is shown", a.Verdicts)
	}
}

// The reference against a copy with noisy weights (Gaussian noise of
// half each tensor's spread) and against the idle baseline: the better
// policy's normalised score minus the worse one's has an interval above
// 0 (the noisy copy and idle are worse by construction; measured on
// these seeds: clean ref − noisy 0.66 [0.19, 0.96], ref − idle 1 [0.91,
// 1.12] on the expert-referenced scale).
func TestCompareWeakenedCopyHasTheRightSign(t *testing.T) {
	p := comparePlan(t, 8, policies.Labelled{Label: "ref", Source: refPolicy()},
		policies.Labelled{Label: "noisy", Source: weakened(t, 0.5)}, policies.Labelled{Label: "idle", Source: "idle"})
	a := runCompare(t, p, t.TempDir(), Options{Workers: 2})
	found := map[string]bool{}
	for _, pd := range a.Diffs {
		// Under occlusion too the reference stays ahead of both (measured:
		// ref − noisy 0.22 [0.15, 0.41] at 0.3 and 0.066 [0.059, 0.085]
		// at 0.6 on these seeds).
		if pd.A == "ref" && (pd.Score == nil || !(pd.Score.Diff.Lo > 0)) {
			t.Errorf("%s: %s − %s = %+v, want an interval above 0", pd.Label, pd.A, pd.B, pd.Score)
		}
		if !pd.Condition.Clean() {
			continue
		}
		found[pd.A+"-"+pd.B] = true
		if pd.Score == nil {
			t.Fatalf("%s − %s: no score difference (%s)", pd.A, pd.B, pd.Note)
		}
		if pd.A == "ref" && !(pd.Score.Diff.Lo > 0) {
			t.Errorf("clean %s − %s = %v, want an interval above 0", pd.A, pd.B, pd.Score.Diff)
		}
		if pd.A == "noisy" && !(pd.Score.Diff.Value >= 0) {
			t.Errorf("clean %s − %s = %v, want at least 0 (idle does nothing)", pd.A, pd.B, pd.Score.Diff)
		}
	}
	if len(found) != 3 {
		t.Fatalf("pairs compared: %v, want ref-noisy, ref-idle, noisy-idle", found)
	}
	for _, pd := range a.Diffs {
		t.Logf("%s %s − %s: score %v, retention %v %s", pd.Label, pd.A, pd.B, pd.Score.Diff, pd.Retention, pd.Note)
	}
}

// A study comparing policies gives the same results.jsonl byte for byte
// with 1 or 2 workers and from 2 shards merged (the seeds depend on the
// condition and episode only; design card "Determinism").
func TestCompareDeterministicAcrossWorkersAndShards(t *testing.T) {
	p := comparePlan(t, 3, policies.Labelled{Label: "ref", Source: refPolicy()}, policies.Labelled{Label: "idle", Source: "idle"})
	base := t.TempDir()
	one := filepath.Join(base, "w1")
	runCompare(t, p, one, Options{Workers: 1})
	want := readFile(t, filepath.Join(one, study.ResultsFile))
	if !bytes.Contains(want, []byte(`"policy":"idle"`)) || !bytes.Contains(want, []byte(`"policy":"ref"`)) {
		t.Fatal("results.jsonl does not name the policies")
	}
	two := filepath.Join(base, "w2")
	runCompare(t, p, two, Options{Workers: 2})
	if !bytes.Equal(want, readFile(t, filepath.Join(two, study.ResultsFile))) {
		t.Fatal("results.jsonl differs between 1 and 2 workers")
	}
	var dirs []string
	for i := range 2 {
		d := filepath.Join(base, fmt.Sprintf("s%d", i))
		if _, err := Run(context.Background(), p, Options{Dir: d, Workers: 1, Shard: study.Shard{Index: i, Count: 2}, Env: DefaultEnv(p, ""), NoReport: true}); err != nil {
			t.Fatal(err)
		}
		dirs = append(dirs, d)
	}
	merged := filepath.Join(base, "merged")
	if _, err := Merge(merged, dirs, true); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(want, readFile(t, filepath.Join(merged, study.ResultsFile))) {
		t.Fatal("2 shards merged differ from the unsharded run")
	}
	for _, f := range []string{"cells.csv"} {
		if !bytes.Equal(readFile(t, filepath.Join(one, f)), readFile(t, filepath.Join(merged, f))) {
			t.Fatalf("%s of the merged shards differs", f)
		}
	}
	md := string(readFile(t, filepath.Join(one, "summary.md")))
	for _, s := range []string{"Policies side by side", "Paired differences between policies", "Which policy is more robust", "ref − idle", "policy ref, patch 8", "policy idle, patch 8", "Caution"} {
		if !strings.Contains(md, s) {
			t.Errorf("summary.md lacks %q", s)
		}
	}
}

// Resuming a study comparing policies keeps its episodes; a changed
// policy list is refused with one line naming both lists, and nothing
// in the folder changes.
func TestCompareResumeAndChangedList(t *testing.T) {
	list := []policies.Labelled{{Label: "ref", Source: refPolicy()}, {Label: "idle", Source: "idle"}}
	p := comparePlan(t, 2, list...)
	dir := t.TempDir()
	runCompare(t, p, dir, Options{Workers: 1})
	before := readFile(t, filepath.Join(dir, study.ResultsFile))
	out, err := Run(context.Background(), p, Options{Dir: dir, Resume: true, Workers: 1, Env: DefaultEnv(p, "")})
	if err != nil || out.Ran != 0 || out.Kept != p.Units() {
		t.Fatalf("resume: %+v %v, want every episode kept", out, err)
	}
	for _, changed := range [][]policies.Labelled{
		{{Label: "ref", Source: refPolicy()}, {Label: "rnd", Source: "random"}},
		{{Label: "ref", Source: refPolicy()}},
		{list[1], list[0]},
	} {
		q := comparePlan(t, 2, changed...)
		_, err := Run(context.Background(), q, Options{Dir: dir, Resume: true, Workers: 1, Env: DefaultEnv(q, "")})
		if err == nil || strings.Contains(err.Error(), "\n") || !strings.Contains(err.Error(), "policy list cannot change") {
			t.Fatalf("resume with %v: %v, want a one-line refusal", policies.ListString(changed), err)
		}
	}
	if !bytes.Equal(before, readFile(t, filepath.Join(dir, study.ResultsFile))) {
		t.Fatal("a refused resume changed results.jsonl")
	}
	if _, err := os.Stat(filepath.Join(dir, study.InfoFile)); err != nil {
		t.Fatal(err)
	}
}

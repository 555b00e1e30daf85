package analysis

import (
	"math"
	"strings"
	"testing"

	"tilebench/vision/policies"
	"tilebench/vision/study"
)

// A hand-written study of two policies: a keeps its clean score under
// occlusion, b loses most of it. The difference of normalised scores on
// the common scale is worked by hand (no floor recorded, so floor 0 and
// the reference is the best clean IQM, 100.5: the IQM of the seed
// offsets, sorted −4 −3 −1 0 1 2 4 5, is the mean of the middle four,
// 0.5; so (IQM a − IQM b) / 100.5), and
// the verdict names a as more robust, with b's retention difference
// interval wholly above 0.
func TestComparePoliciesHandWritten(t *testing.T) {
	p, err := study.NewPlan(study.Definition{Name: "t", Game: "paddle", Episodes: 8, Seed: 2,
		Policies: []policies.Labelled{{Label: "a", Source: "idle"}, {Label: "b", Source: "random"}},
		Axes:     study.Axes{Occlude: study.Axis{"none,random:0.5"}}, Stats: study.StatsDef{Resamples: 400}})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	if err := study.WriteInfo(dir, &study.Info{Format: 1, Fingerprint: p.Fingerprint, Definition: p.Def, Cells: p.Cells, Episodes: 8}); err != nil {
		t.Fatal(err)
	}
	// Cells: a clean, a occluded, b clean, b occluded; per-seed
	// difficulty shared by both policies (common random numbers).
	seed := []float64{0, 4, -3, 2, -1, 5, -4, 1}
	var recs []study.Record
	for c, cell := range p.Cells {
		for e := range 8 {
			v := 100 + seed[e]
			switch {
			case cell.Policy == "a" && !cell.Clean():
				v = 90 + seed[e]
			case cell.Policy == "b" && !cell.Clean():
				v = 40 + seed[e]
			}
			recs = append(recs, study.Record{Format: 1, Study: p.Fingerprint, Cell: c, Episode: e, Params: cell, Return: v, Steps: 10, End: "completed"})
		}
	}
	if err := study.WriteResults(dir, recs); err != nil {
		t.Fatal(err)
	}
	a, err := Analyze(dir)
	if err != nil {
		t.Fatal(err)
	}
	if len(a.Diffs) != 2 {
		t.Fatalf("%d differences, want 2 conditions", len(a.Diffs))
	}
	for _, pd := range a.Diffs {
		want := 0.0 // clean: the same returns
		if !pd.Condition.Clean() {
			want = 50 / 100.5 // (90.5 − 40.5) / 100.5: a shift moves the IQM alike
		}
		if pd.Score == nil || math.Abs(pd.Score.Diff.Value-want) > 1e-12 {
			t.Fatalf("%s: score difference %+v, want %v", pd.Label, pd.Score, want)
		}
		if !pd.Condition.Clean() {
			// Retentions 90.5/100.5 and 40.5/100.5 (each over its own clean IQM).
			if r := pd.Retention; r == nil || math.Abs(r.Value-50/100.5) > 1e-9 || !(r.Lo > 0) {
				t.Fatalf("retention difference %v (%s), want 50/100.5 with an interval above 0", r, pd.Note)
			}
		}
	}
	if len(a.Verdicts) != 1 || a.Verdicts[0].More != "a" || !strings.Contains(a.Verdicts[0].Statement, "a is more robust than b") {
		t.Fatalf("verdicts %+v", a.Verdicts)
	}
	rd := a.ReportData(dir)
	ids := map[string]bool{}
	for _, tb := range rd.Tables {
		ids[tb.ID] = true
	}
	if !ids["policies"] || !ids["policy-diffs"] || !ids["robustness"] {
		t.Fatalf("report tables %v", ids)
	}
	if js := a.Comparison(); js == nil || len(js.Diffs) != 2 || js.Verdicts[0].More != "a" || !js.Diffs[1].Retention.ExcludesZero {
		t.Fatalf("json comparison %+v", js)
	}
}

// A study of several policies is titled by their labels, each with the
// file name of its weights (not its folders) or its source otherwise.
func TestPoliciesLabel(t *testing.T) {
	d := study.Definition{Policies: []policies.Labelled{
		{Label: "clean", Source: "runs/a/clean-p8.safetensors"},
		{Label: "ext", Source: "exec:python3 examples/policy_numpy.py"},
		{Label: "base", Source: "idle"},
	}}
	want := "clean (clean-p8.safetensors) vs ext (exec:python3 examples/policy_numpy.py) vs base (idle)"
	if got := policiesLabel(d); got != want {
		t.Errorf("policiesLabel = %q, want %q", got, want)
	}
}

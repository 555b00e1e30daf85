package study

import (
	"encoding/json"
	"strings"
	"testing"

	"tilebench/vision/policies"
)

// A study file lists policies as [[policies]] tables; the policy is one
// more axis: every condition once per policy, in the order given, with
// the same seeds for every policy (Plan.PipeSeed keys on the condition).
func TestPolicyListAxis(t *testing.T) {
	d, err := Parse([]byte(`
episodes = 3
[policy]
family = "mlp"
[axes]
occlude = "none,random:0.5"
[[policies]]
label = "clean"
source = "expert"
[[policies]]
label = "occl-2"
source = "idle"
`))
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewPlan(*d)
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Cells) != 4 || p.Cells[0].Policy != "clean" || p.Cells[2].Policy != "occl-2" {
		t.Fatalf("cells %+v, want 2 conditions for clean, then 2 for occl-2", p.Cells)
	}
	for c := 0; c < 2; c++ {
		a, b := p.Cells[c], p.Cells[c+2]
		if a.Key() != b.Key() || a.ID() == b.ID() || a.Condition() != b.Condition() {
			t.Fatalf("cells %d and %d: keys %q %q, ids %q %q", c, c+2, a.Key(), b.Key(), a.ID(), b.ID())
		}
		for e := range 3 {
			if p.PipeSeed(c, e) != p.PipeSeed(c+2, e) {
				t.Fatalf("condition %d episode %d: the policies get different seeds", c, e)
			}
		}
		// The clean condition comes first ("none" leads the occlusion list).
		if p.Reference(c+2) != 2 || p.Reference(c) != 0 {
			t.Fatalf("references %d %d, want each policy's own clean cell", p.Reference(c), p.Reference(c+2))
		}
	}
	// Records name the policy; a study of one unlabelled policy writes
	// no "policy" key, so its results.jsonl keeps its bytes.
	b, _ := json.Marshal(p.Cells[2])
	if !strings.Contains(string(b), `"policy":"occl-2"`) {
		t.Fatalf("cell JSON %s lacks the policy", b)
	}
	one, err := NewPlan(Definition{Episodes: 3})
	if err != nil {
		t.Fatal(err)
	}
	b, _ = json.Marshal(one.Cells[0])
	if strings.Contains(string(b), "policy") {
		t.Fatalf("single-policy cell JSON %s names a policy", b)
	}
	js, _ := json.Marshal(one.Def)
	if strings.Contains(string(js), `"policies"`) {
		t.Fatalf("single-policy definition %s has a policies key (its fingerprint would change)", js)
	}
	// A recorded study rebuilds the same plan (study.json round trip).
	var back Definition
	js, _ = json.Marshal(p.Def)
	if err := json.Unmarshal(js, &back); err != nil {
		t.Fatal(err)
	}
	q, err := NewPlan(back)
	if err != nil || q.Fingerprint != p.Fingerprint {
		t.Fatalf("round trip: %v %v", q, err)
	}
}

// Bad policy lists in a study file: one line naming the key and the
// problem.
func TestPolicyListErrors(t *testing.T) {
	for _, c := range []struct{ toml, want string }{
		{"[[policies]]\nlabel = \"a\"\nsource = \"expert\"\n[[policies]]\nlabel = \"a\"\nsource = \"idle\"\n", `"a" is given twice`},
		{"[[policies]]\nlabel = \"a:b\"\nsource = \"expert\"\n", "cannot be part of a file name"},
		{"[[policies]]\nlabel = \"\"\nsource = \"expert\"\n", "label is empty"},
		{"[[policies]]\nlabel = \"a\"\nsource = \"\"\n", "no policy given"},
		{"[policy]\nsource = \"expert\"\n[[policies]]\nlabel = \"a\"\nsource = \"idle\"\n", "not both"},
		{"[[policies]]\nlabel = \"a\"\nsrc = \"idle\"\n", "unknown key"},
	} {
		_, err := Parse([]byte(c.toml))
		if err == nil || !strings.Contains(err.Error(), c.want) || strings.Contains(err.Error(), "\n") {
			t.Errorf("%q: %v, want one line with %q", c.toml, err, c.want)
		}
	}
	// Weights files of different patch sizes and no patch given.
	d := Definition{Policies: []policies.Labelled{{Label: "a", Source: "../../testdata/policies/drive-attention-p8.safetensors"}, {Label: "b", Source: "../../testdata/policies/drive-attention-p4.safetensors"}}}
	if err := d.Normalize(); err == nil || !strings.Contains(err.Error(), "different patch sizes") {
		t.Errorf("files of patches 8 and 4: %v", err)
	}
	d = Definition{Policies: []policies.Labelled{{Label: "a", Source: "../../testdata/policies/drive-attention-p4.safetensors"}, {Label: "b", Source: "idle"}}}
	if err := d.Normalize(); err != nil || d.Patch[0] != "4" {
		t.Errorf("one file of patch 4: %v %v", d.Patch, err)
	}
}

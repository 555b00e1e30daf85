package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// stress with two labelled policies: the study runs, the report and
// --json carry the comparison; a bad list is one line with exit 2 and
// writes nothing.
func TestStressComparesLabelledPolicies(t *testing.T) {
	ref := shippedPolicy("drive-attention-p8.safetensors")
	out := filepath.Join(t.TempDir(), "cmp")
	args := []string{"stress", "--game", "drive", "--policy", "ref=" + ref, "--policy", "idle=idle",
		"--occlude", "random:0.4", "--episodes", "3", "--resamples", "200", "--workers", "1", "--out", out, "--json"}
	code, stdout, stderr := runCLI(t, "", args...)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	var js struct {
		Comparison struct {
			Diffs []struct {
				A, B      string
				Condition string
				Score     *struct{ Value, Lo, Hi float64 } `json:"score_diff"`
			}
			Verdicts []struct{ Statement string }
		}
	}
	if err := json.Unmarshal([]byte(stdout), &js); err != nil || len(js.Comparison.Diffs) != 2 || len(js.Comparison.Verdicts) != 1 {
		t.Fatalf("--json %s: %v", stdout, err)
	}
	for _, d := range js.Comparison.Diffs {
		if d.A != "ref" || d.B != "idle" || d.Score == nil || !(d.Score.Lo > 0) {
			t.Errorf("%s: %s − %s = %+v, want the reference ahead of idle", d.Condition, d.A, d.B, d.Score)
		}
	}
	md, _ := os.ReadFile(filepath.Join(out, "summary.md"))
	for _, s := range []string{"Paired differences between policies", "ref − idle", "Caution"} {
		if !strings.Contains(string(md), s) {
			t.Errorf("summary.md lacks %q", s)
		}
	}
	// Resume with the same list works; a changed list is refused.
	if code, _, stderr := runCLI(t, "", append(args[:len(args)-1], "--resume")...); code != 0 {
		t.Fatalf("resume: exit %d: %s", code, stderr)
	}
	changed := append([]string(nil), args[:len(args)-1]...)
	changed[6] = "idle=random"
	code, _, stderr = runCLI(t, "", append(changed, "--resume")...)
	if code != 1 {
		t.Fatalf("changed list on --resume: exit %d", code)
	}
	oneLine(t, stderr, "policy list cannot change")

	for _, c := range []struct {
		pols []string
		want string
	}{
		{[]string{"a=expert", "a=idle"}, `"a" is given twice`},
		{[]string{"a/b=expert", "c=idle"}, "cannot be part of a file name"},
		{[]string{"=expert"}, "label is empty"},
		{[]string{"a=expert", "idle"}, "has no label"},
	} {
		dir := filepath.Join(t.TempDir(), "bad")
		args := []string{"stress", "--episodes", "1", "--out", dir}
		for _, p := range c.pols {
			args = append(args, "--policy", p)
		}
		code, _, stderr := runCLI(t, "", args...)
		if code != 2 {
			t.Errorf("%v: exit %d, want 2", c.pols, code)
		}
		oneLine(t, stderr, c.want)
		if _, err := os.Stat(dir); !os.IsNotExist(err) {
			t.Errorf("%v: the study folder was created", c.pols)
		}
	}
}

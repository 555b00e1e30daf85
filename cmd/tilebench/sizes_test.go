package main

import (
	"encoding/json"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision"
)

func TestSizesStudy(t *testing.T) {
	if testing.Short() {
		t.Skip("plays untrained networks on the driving game")
	}
	dir := t.TempDir()
	out := filepath.Join(dir, "sizes")
	code, stdout, stderr := runCLI(t, "", "sizes", "--game", "drive", "--family", "attention", "--patch", "16,32",
		"--occlude", "none,random:0.5", "--episodes", "2", "--resamples", "200", "--budget-mflop", "100",
		"--reference", filepath.Join(dir, "none"), "--out", out)
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	if !strings.Contains(stderr, "untrained") || !strings.Contains(stdout, "recommended") || !strings.Contains(stdout, "patch  16") {
		t.Fatalf("stdout %q stderr %q", stdout, stderr)
	}
	// Each line says what its score is: the clean cell and random:0.5.
	if !strings.Contains(stdout, "(normalised, pooled: clean + 1 stress condition)") {
		t.Errorf("stdout %q: the score is not described", stdout)
	}
	if !strings.HasSuffix(stdout, "\ncaution: "+vision.Caution+"\n") {
		t.Errorf("stdout %q: want the caution as its last line", stdout)
	}
	data, err := os.ReadFile(filepath.Join(out, "costs.json"))
	if err != nil {
		t.Fatal(err)
	}
	var costs struct {
		Format int
		Costs  []struct {
			Patch, Tokens int
			MFLOP         float64
			LatencyUS     float64 `json:"latency_us"`
		}
	}
	if err := json.Unmarshal(data, &costs); err != nil || costs.Format != 1 || len(costs.Costs) != 2 {
		t.Fatalf("costs.json %s: %v", data, err)
	}
	// 112×80 frames: 7×5 = 35 tokens at patch 16, 4×3 = 12 at patch 32
	// (the frame padded on the right and bottom).
	if costs.Costs[0].Tokens != 35 || costs.Costs[1].Tokens != 12 || !(costs.Costs[0].MFLOP > 0) || !(costs.Costs[0].LatencyUS > 0) {
		t.Fatalf("costs %+v", costs.Costs)
	}
}

func TestSizesBadInput(t *testing.T) {
	out := filepath.Join(t.TempDir(), "o")
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"sizes", "--budget-us", "200", "--budget-mflop", "2", "--out", out}, "not both"},
		{[]string{"sizes", "--train", "magic", "--out", out}, "--train"},
		{[]string{"sizes", "--patch", "8:4:1", "--out", out}, "yields no values"},
		{[]string{"sizes", "--policy", "expert", "--out", out}, "expert"},
		{[]string{"sizes", "--train", "clone", "--shard", "0/2", "--out", out}, "every shard"},
	} {
		code, _, stderr := runCLI(t, "", c.args...)
		if code != 2 {
			t.Errorf("%v: exit %d (%s)", c.args, code, stderr)
			continue
		}
		oneLine(t, stderr, c.want)
	}
}

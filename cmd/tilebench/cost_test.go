package main

import (
	"encoding/json"
	"strings"
	"testing"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision/nets"
)

func TestCostTableAndJSON(t *testing.T) {
	code, out, errOut := runCLI(t, "", "cost", "--game", "drive", "--family", "attention", "--patch", "4,8,16", "--reps", "2", "--steps", "2")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	for _, want := range []string{"patch", "MFLOP/step", "4x4", "8x8", "16x16", "latency"} {
		if !strings.Contains(out, want) {
			t.Errorf("table lacks %q:\n%s", want, out)
		}
	}
	code, out, errOut = runCLI(t, "", "cost", "--game", "paddle", "--family", "meanpool", "--patch", "5,10", "--json", "--reps", "1", "--steps", "1")
	if code != 0 {
		t.Fatalf("exit %d: %s", code, errOut)
	}
	var res struct {
		Format int    `json:"format"`
		Family string `json:"family"`
		Frame  []int  `json:"frame"`
		Sizes  []struct {
			Patch     string `json:"patch"`
			Tokens    int    `json:"tokens"`
			Params    int    `json:"params"`
			FLOPs     int64  `json:"flops"`
			LatencyNS int64  `json:"latency_ns"`
		} `json:"sizes"`
	}
	if err := json.Unmarshal([]byte(out), &res); err != nil {
		t.Fatalf("%v\n%s", err, out)
	}
	if res.Format != 1 || res.Family != "meanpool" || len(res.Sizes) != 2 {
		t.Fatalf("summary %+v", res)
	}
	// The figures are the cost model's for the paddle game's frame, with
	// centring (the default, as tilebench train makes policies).
	g, err := games.Build("paddle", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	sp := g.Spec()
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: 10})
	if err != nil {
		t.Fatal(err)
	}
	c, err := nets.Estimate(nets.Config{Family: "meanpool", Centre: true}, grid, sp.Action)
	if err != nil {
		t.Fatal(err)
	}
	r := res.Sizes[1]
	if r.Tokens != c.Tokens || r.FLOPs != c.FLOPs || r.Params != c.Params || r.LatencyNS <= 0 {
		t.Errorf("row %+v, cost model %+v", r, c)
	}
	if res.Sizes[0].Tokens <= r.Tokens {
		t.Errorf("patch 5 gives %d tokens, patch 10 %d: smaller patches should give more", res.Sizes[0].Tokens, r.Tokens)
	}
}

func TestCostBadInput(t *testing.T) {
	for _, args := range [][]string{
		{"cost", "--game", "chess"},
		{"cost", "--family", "cnn", "--reps", "0"},
		{"cost", "--patch", "8,x"},
		{"cost", "--patch", "500"},
		{"cost", "--steps", "0"},
		{"cost", "--edge", "wrap"},
		{"cost", "extra"},
	} {
		code, _, errOut := runCLI(t, "", args...)
		if code != 2 || strings.Count(errOut, "\n") != 1 {
			t.Errorf("%v: exit %d, stderr %q: want usage error on one line", args, code, errOut)
		}
	}
}

package runner

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/games"
	_ "tilebench/games/all" // the built-in games
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/nets"
	"tilebench/vision/policies"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// gamePlan is a small study on the real driving game with an untrained
// set-attention network, so that every part of the pipeline (game,
// tokenizer, transforms, network) takes part.
func gamePlan(t *testing.T, source string) *study.Plan {
	t.Helper()
	p, err := study.NewPlan(study.Definition{Name: "game", Game: "drive", Episodes: 2, Seed: 3,
		Policy: study.PolicyDef{Source: source, Family: "attention"}, Patch: study.Axis{"16"},
		Axes:  study.Axes{Occlude: study.Axis{"random:0.5"}, Scramble: study.Axis{"none,full"}, Every: study.Axis{"0,7"}},
		Stats: study.StatsDef{Resamples: 200}, Strips: []int{0, 5}})
	if err != nil {
		t.Fatal(err)
	}
	return p
}

func TestGameStudyDeterministic(t *testing.T) {
	if testing.Short() {
		t.Skip("plays the driving game")
	}
	p := gamePlan(t, "fresh")
	base := t.TempDir()
	env := func(int) (Env, error) { return NewGameEnv("drive", tokenPolicy), nil }
	run := func(name string, w int, s study.Shard) string {
		dir := filepath.Join(base, name)
		if _, err := Run(context.Background(), p, Options{Dir: dir, Workers: w, Shard: s, Env: env}); err != nil {
			t.Fatal(err)
		}
		return dir
	}
	one := run("w1", 1, study.Shard{})
	two := run("w2", 2, study.Shard{})
	want := readFile(t, filepath.Join(one, study.ResultsFile))
	recs, _, _ := study.ReadResults(one)
	returns := map[float64]bool{}
	for _, r := range recs {
		returns[r.Return] = true
	}
	if len(returns) < len(recs)/2 {
		t.Fatalf("only %d distinct returns in %d episodes: the transforms do not reach the policy", len(returns), len(recs))
	}
	if !bytes.Equal(want, readFile(t, filepath.Join(two, study.ResultsFile))) {
		t.Fatal("results.jsonl differs between 1 and 2 workers")
	}
	if !bytes.Equal(readFile(t, filepath.Join(one, "cells.csv")), readFile(t, filepath.Join(two, "cells.csv"))) {
		t.Fatal("cells.csv differs between 1 and 2 workers")
	}
	var shards []string
	for i := range 3 {
		shards = append(shards, run(fmt.Sprintf("s%d", i), 1, study.Shard{Index: i, Count: 3}))
	}
	merged := filepath.Join(base, "merged")
	if _, err := Merge(merged, shards, true); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(want, readFile(t, filepath.Join(merged, study.ResultsFile))) {
		t.Fatal("3 shards merged differ from the unsharded run")
	}
	if !bytes.Equal(readFile(t, filepath.Join(one, "cells.csv")), readFile(t, filepath.Join(merged, "cells.csv"))) {
		t.Fatal("cells.csv of 3 merged shards differs")
	}
	// Any episode re-runs alone to the same record (episode 0 ran with
	// the strip hook, the replay without).
	for c := range p.Cells {
		fresh, rec, err := Replay(one, c, 0, env)
		if err != nil || rec == nil {
			t.Fatal(err)
		}
		a, _ := study.EncodeRecord(&fresh)
		b, _ := study.EncodeRecord(rec)
		if !bytes.Equal(a, b) {
			t.Fatalf("replay of cell %d:\n%s\nrecorded:\n%s", c, a, b)
		}
	}
	if _, m := analysis.LoadStrip(one, 0); m == nil || len(m.Steps) != 2 || m.Width != 112 {
		t.Fatalf("strip of cell 0: %+v", m)
	}
}

// tokenPolicy drives with a steady pedal and steers by the first
// tokens it is given, so its return depends on the transforms and the
// pipeline's seeds.
func tokenPolicy(int, games.Game, *patch.Grid) (vision.Policy, error) { return &firstTokens{}, nil }

type firstTokens struct{}

func (firstTokens) Info() vision.Info { return vision.Info{Family: "test", Label: "first tokens"} }
func (firstTokens) Reset(uint64)      {}
func (firstTokens) Act(obs *vision.Observation, a []float64) error {
	ts := obs.Tokens
	var s float64
	for i := 0; i < min(4, ts.N); i++ {
		for _, v := range ts.Token(i) {
			s += float64(v)
		}
	}
	a[0] = math.Sin(s + float64(obs.Step)/10)
	a[1] = 0.6
	return nil
}

func TestWeightsGeometryMismatch(t *testing.T) {
	// A network cut for 64×64 frames cannot play the 112×80 driving game.
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: 64, Height: 64, PatchW: 16})
	if err != nil {
		t.Fatal(err)
	}
	n, err := nets.New(nets.Config{Family: "attention"}, grid, g.Spec().Action, 1)
	if err != nil {
		t.Fatal(err)
	}
	wpath := filepath.Join(t.TempDir(), "small.safetensors")
	if err := nets.Save(wpath, n, nil); err != nil {
		t.Fatal(err)
	}
	p := gamePlan(t, wpath)
	dir := filepath.Join(t.TempDir(), "out")
	_, err = Run(context.Background(), p, Options{Dir: dir, Env: DefaultEnv(p, dir)})
	if err == nil || !strings.Contains(err.Error(), "64x64") || !strings.Contains(err.Error(), "112x80") || strings.Contains(err.Error(), "\n") {
		t.Fatalf("err %v: want one line naming both frame sizes", err)
	}
	if _, err := os.Stat(dir); !os.IsNotExist(err) {
		t.Fatal("a refused study wrote its folder")
	}
	// The same file at the right geometry but the wrong patch size.
	grid, _ = patch.NewGrid(patch.GridConfig{Width: 112, Height: 80, PatchW: 8})
	n, _ = nets.New(nets.Config{Family: "attention"}, grid, g.Spec().Action, 1)
	if err := nets.Save(wpath, n, nil); err != nil {
		t.Fatal(err)
	}
	_, err = Run(context.Background(), p, Options{Dir: dir, Env: DefaultEnv(p, dir)})
	if err == nil || !strings.Contains(err.Error(), "patch 8x8") {
		t.Fatalf("err %v: want the patch size named", err)
	}
	if got, ok := policies.PatchOf(wpath); !ok || got != 8 {
		t.Fatalf("PatchOf %d %v", got, ok)
	}
}

func TestReferencePolicies(t *testing.T) {
	g, err := games.Build("drive", games.Setup{})
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for _, fam := range []string{"attention", "posattention"} {
		for _, ps := range []int{4, 8, 16} {
			grid, _ := patch.NewGrid(patch.GridConfig{Width: 112, Height: 80, PatchW: ps})
			n, err := nets.New(nets.Config{Family: fam}, grid, g.Spec().Action, 1)
			if err != nil {
				t.Fatal(err)
			}
			if err := nets.Save(filepath.Join(dir, fmt.Sprintf("drive-%s-p%d.safetensors", fam, ps)), n, nil); err != nil {
				t.Fatal(err)
			}
		}
	}
	tmpl, ok := ReferencePolicies(dir, "drive", "attention", []int{4, 8, 16})
	if !ok || tmpl != filepath.Join(dir, "drive-attention-p{patch}.safetensors") {
		t.Fatalf("template %q %v", tmpl, ok)
	}
	tmpl, ok = ReferencePolicies(dir, "drive", "posattention", []int{16})
	if !ok || tmpl != filepath.Join(dir, "drive-posattention-p{patch}.safetensors") {
		t.Fatalf("template %q %v", tmpl, ok)
	}
	if _, ok := ReferencePolicies(dir, "drive", "attention", []int{4, 6}); ok {
		t.Fatal("found a policy for patch 6")
	}
	if _, ok := ReferencePolicies(dir, "paddle", "attention", []int{4}); ok {
		t.Fatal("found a paddle policy")
	}
}

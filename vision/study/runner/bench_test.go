package runner

import (
	"context"
	"fmt"
	"path/filepath"
	"testing"
	"time"

	"tilebench/games"
	"tilebench/vision/study"
)

// benchPlan is the whole-pipeline benchmark study: the driving game,
// random occlusion of a quarter of the tokens with a full scramble every
// 10 steps, and an (untrained) set-attention policy at patch 8.
func benchPlan(b *testing.B, episodes int) *study.Plan {
	b.Helper()
	p, err := study.NewPlan(study.Definition{Name: "bench", Game: "drive", Episodes: episodes, Policy: study.PolicyDef{Source: "fresh", Family: "attention"},
		Patch: study.Axis{"8"}, Axes: study.Axes{Occlude: study.Axis{"random:0.25"}, Scramble: study.Axis{"full"}, Every: study.Axis{"10"}}, Strips: []int{}})
	if err != nil {
		b.Fatal(err)
	}
	return p
}

// BenchmarkStudyStep measures one worker's steps per second through the
// whole pipeline: game step and render, tokenize, transforms, policy.
func BenchmarkStudyStep(b *testing.B) {
	p := benchPlan(b, 1)
	env := NewGameEnv("drive", Policies(p, ""))
	pl, err := env.Player(p.Cells[0])
	if err != nil {
		b.Fatal(err)
	}
	if _, err := pl.Play(games.HeldOut(0), 1, nil); err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	b.ResetTimer()
	cpu0 := cpuTime()
	steps := 0
	for i := 0; steps < b.N; i++ {
		res, err := pl.Play(games.HeldOut(i), uint64(i), nil)
		if err != nil {
			b.Fatal(err)
		}
		steps += res.Steps
	}
	reportSteps(b, steps, cpuTime()-cpu0)
}

// reportSteps reports steps per wall-clock second and per CPU-second (the
// figure that other load on the machine does not change).
func reportSteps(b *testing.B, steps int, cpu time.Duration) {
	b.ReportMetric(float64(steps)/b.Elapsed().Seconds(), "steps/s")
	if cpu > 0 {
		b.ReportMetric(float64(steps)/cpu.Seconds(), "steps/cpu-s")
	}
}

// BenchmarkStudyWorkers runs a small study (16 episodes) with 1 and 2
// workers, the whole runner included (preflight, records synced to disk);
// compare their steps/s for the scaling ratio on an otherwise idle
// machine. steps/cpu-s staying level from 1 to 2 workers shows the
// runner adds no contention of its own.
func BenchmarkStudyWorkers(b *testing.B) {
	for _, w := range []int{1, 2} {
		b.Run(fmt.Sprintf("workers=%d", w), func(b *testing.B) {
			p := benchPlan(b, 16)
			steps := 0
			b.ReportAllocs()
			cpu0 := cpuTime()
			for i := 0; i < b.N; i++ {
				dir := filepath.Join(b.TempDir(), "s")
				out, err := Run(context.Background(), p, Options{Dir: dir, Workers: w, Env: DefaultEnv(p, ""), NoReport: true})
				if err != nil {
					b.Fatal(err)
				}
				steps += out.Steps
			}
			reportSteps(b, steps, cpuTime()-cpu0)
		})
	}
}

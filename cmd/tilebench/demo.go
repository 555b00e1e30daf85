package main

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"strconv"
	"time"

	"tilebench/vision/policies"
	"tilebench/vision/report"
	"tilebench/vision/study"
	"tilebench/vision/study/runner"
)

func init() {
	register(&command{name: "demo", summary: "run a small patch-size study and stress studies on the built-in games; write the reports", run: runDemo})
}

const demoUsage = `demo [--out DIR]

Runs, on 2 cores in about a minute: on the built-in driving game a
patch-size study (patch 4, 8, 16; clean and under random occlusion and
scrambling) and a stress study of the patch-8 policy (random occlusion
0 to 0.75 and a block, each with and without a full scramble), and the
same stress study of the patch-10 policy on the paddle game. Uses the
reference policies in testdata/policies when they are there, untrained
networks otherwise (the report says which). Writes DIR/index.html with
links to DIR/sizes/report.html, DIR/stress/report.html and
DIR/paddle-stress/report.html and prints the paths. Running it again on
the same DIR re-makes the reports.

  tilebench demo --out tilebench-demo

options:`

// demoStudy is one study of the demo: its folder under --out, its title
// and its definition.
type demoStudy struct {
	dir, title string
	def        study.Definition
}

// demoStudies returns the studies of the demo: a patch-size and a stress
// study on drive (with a camera-shift axis), and a stress study on paddle.
func demoStudies(refDir string, episodes int) []demoStudy {
	sizes := study.Definition{Name: "demo: patch sizes", Kind: "sizes", Game: "drive", Episodes: episodes, Seed: 1,
		Patch:  study.Axis{"4,8,16"},
		Policy: study.PolicyDef{Source: "fresh", Family: "attention"},
		Axes:   study.Axes{Occlude: study.Axis{"none,random:0.5"}, Scramble: study.Axis{"none,full"}},
		Stats:  study.StatsDef{Resamples: 1000}}
	if t, ok := runner.ReferencePolicies(refDir, "drive", "attention", []int{4, 8, 16}); ok {
		sizes.Policy.Source = t
	}
	stress := func(name, game string, p int) study.Definition {
		d := study.Definition{Name: name, Kind: "stress", Game: game, Episodes: episodes, Seed: 1,
			Patch:  study.Axis{strconv.Itoa(p)},
			Policy: study.PolicyDef{Source: "fresh", Family: "attention"},
			Axes:   study.Axes{Occlude: study.Axis{"random:0:0.75:0.25,block:0.4"}, Scramble: study.Axis{"none,full"}},
			Stats:  study.StatsDef{Resamples: 1000}}
		if t, ok := runner.ReferencePolicies(refDir, game, "attention", []int{p}); ok {
			d.Policy.Source = policies.Expand(t, p)
		}
		return d
	}
	drive := stress("demo: stress", "drive", 8)
	// One camera corruption on drive: a shift by 3 px (severity 3), less
	// than a patch, so every pixel lands in another token.
	drive.Axes.Corrupt = study.Axis{"none,shift:s3"}
	return []demoStudy{
		{"sizes", "Patch-size study", sizes},
		{"stress", "Stress study", drive},
		{"paddle-stress", "Stress study", stress("demo: paddle stress", "paddle", 10)},
	}
}

func runDemo(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "demo", demoUsage)
	out := fs.String("out", "tilebench-demo", "output `DIR`")
	episodes := fs.Int("episodes", 30, "episodes per cell")
	workers := fs.Int("workers", 0, "parallel workers (0: one per core); results do not depend on it")
	refDir := fs.String("reference", "testdata/policies", "folder of the reference policies")
	asJSON := fs.Bool("json", false, "print a machine-readable summary")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("demo: unexpected argument %q", fs.Arg(0))
	}
	if *episodes < 1 || *episodes > 1000 {
		return usagef("demo: --episodes %d: want 1..1000", *episodes)
	}
	start := time.Now()
	studies := demoStudies(*refDir, *episodes)
	plans := make([]*study.Plan, len(studies))
	for i := range studies {
		studies[i].def.Workers = *workers
		p, err := study.NewPlan(studies[i].def)
		if err != nil {
			return err
		}
		if err := runner.CheckDir(p, filepath.Join(*out, studies[i].dir), true, study.Shard{}); err != nil {
			return fmt.Errorf("%w (demo reuses its own folders only)", err)
		}
		plans[i] = p
	}
	sctx, stop := interruptible()
	defer stop()
	cmd := commandLine(append([]string{"demo"}, args...))
	var reports []string
	untrained := false
	for i, st := range studies {
		p, dir := plans[i], filepath.Join(*out, st.dir)
		opt := runner.Options{Dir: dir, Workers: p.Def.Workers, Resume: true, Command: cmd}
		if _, err := runWithProgress(sctx, ctx, p, opt, st.def.Name); err != nil {
			return err
		}
		reports = append(reports, filepath.Join(dir, "report.html"))
		untrained = untrained || p.Def.Policy.Source == "fresh"
	}
	index := filepath.Join(*out, "index.html")
	if err := writeDemoIndex(index, studies, plans); err != nil {
		return err
	}
	if *asJSON {
		b, err := json.MarshalIndent(map[string]any{"format": 1, "index": index,
			"reports": reports, "seconds": time.Since(start).Seconds()}, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return nil
	}
	fmt.Fprintf(ctx.stdout, "demo finished in %s\n", time.Since(start).Round(time.Second))
	if untrained {
		fmt.Fprintf(ctx.stdout, "note: some reference policies were not found in %s (run from the repository's root, or give --reference DIR); the demo used untrained networks for them\n", *refDir)
	}
	for _, r := range reports {
		fmt.Fprintf(ctx.stdout, "report: %s\n", r)
	}
	fmt.Fprintf(ctx.stdout, "open: %s\n", index)
	return nil
}

// writeDemoIndex writes the page that links to the demo's reports.
func writeDemoIndex(path string, studies []demoStudy, plans []*study.Plan) error {
	var entries []report.IndexEntry
	for i, st := range studies {
		p := plans[i]
		entries = append(entries, report.IndexEntry{Href: st.dir + "/report.html", Title: st.title,
			About: fmt.Sprintf("%s, %s × %s, policy %s", p.Def.Game, plural(len(p.Cells), "cell"), plural(p.Def.Episodes, "episode"), p.Def.Policy.Source)})
	}
	return report.WriteIndex(path, "tilebench demo", entries)
}

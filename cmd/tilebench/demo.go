package main

import (
	"encoding/json"
	"fmt"
	"html"
	"io"
	"path/filepath"
	"time"

	"tilebench/internal/atomicfile"
	"tilebench/vision/report"
	"tilebench/vision/study"
)

func init() {
	register(&command{name: "demo", summary: "run a small patch-size study and a stress study on the built-in driving game; write the reports", run: runDemo})
}

const demoUsage = `demo [--out DIR]

Runs, on the built-in driving game and 2 cores in about a minute or two:
a patch-size study (patch 4, 8, 16; clean and under random occlusion and
scrambling) and a stress study of the patch-8 policy (random occlusion
0 to 0.75 and a block, each with and without a full scramble). Uses the
reference policies in testdata/policies when they are there, untrained
networks otherwise (the report says which). Writes DIR/index.html with
links to DIR/sizes/report.html and DIR/stress/report.html and prints the
paths. Running it again on the same DIR re-makes the reports.

  tilebench demo --out tilebench-demo

options:`

// demoStudies returns the two studies of the demo.
func demoStudies(refDir string, episodes int) (sizes, stress study.Definition) {
	sizes = study.Definition{Name: "demo: patch sizes", Kind: "sizes", Game: "drive", Episodes: episodes, Seed: 1,
		Patch:  study.Axis{"4,8,16"},
		Policy: study.PolicyDef{Source: "fresh", Family: "attention"},
		Axes:   study.Axes{Occlude: study.Axis{"none,random:0.5"}, Scramble: study.Axis{"none,full"}},
		Stats:  study.StatsDef{Resamples: 1000}}
	if t, ok := study.ReferencePolicies(refDir, "drive", "attention", []int{4, 8, 16}); ok {
		sizes.Policy.Source = t
	}
	stress = study.Definition{Name: "demo: stress", Kind: "stress", Game: "drive", Episodes: episodes, Seed: 1,
		Patch:  study.Axis{"8"},
		Policy: study.PolicyDef{Source: "fresh", Family: "attention"},
		Axes:   study.Axes{Occlude: study.Axis{"random:0:0.75:0.25,block:0.4"}, Scramble: study.Axis{"none,full"}},
		Stats:  study.StatsDef{Resamples: 1000}}
	if t, ok := study.ReferencePolicies(refDir, "drive", "attention", []int{8}); ok {
		stress.Policy.Source = study.PolicyPath(t, 8)
	}
	return sizes, stress
}

func runDemo(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "demo", demoUsage)
	out := fs.String("out", "tilebench-demo", "output `DIR`")
	episodes := fs.Int("episodes", 30, "episodes per cell")
	workers := fs.Int("workers", 0, "parallel workers (0: one per core)")
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
	sizesDef, stressDef := demoStudies(*refDir, *episodes)
	sizesDef.Workers, stressDef.Workers = *workers, *workers
	sp, err := study.NewPlan(sizesDef)
	if err != nil {
		return err
	}
	tp, err := study.NewPlan(stressDef)
	if err != nil {
		return err
	}
	sctx, stop := interruptible()
	defer stop()
	sizesDir, stressDir := filepath.Join(*out, "sizes"), filepath.Join(*out, "stress")
	for _, dir := range []string{sizesDir, stressDir} {
		p := sp
		if dir == stressDir {
			p = tp
		}
		if err := study.CheckDir(p, dir, true, study.Shard{}); err != nil {
			return fmt.Errorf("%w (demo reuses its own folders only)", err)
		}
	}
	cmd := commandLine(append([]string{"demo"}, args...))
	if _, err := runPlan(sctx, ctx, sp, sizesDir, true, study.Shard{}, cmd, "demo: patch sizes"); err != nil {
		return err
	}
	if err := study.FinishSizes(sp, sizesDir); err != nil {
		return err
	}
	if _, err := runPlan(sctx, ctx, tp, stressDir, true, study.Shard{}, cmd, "demo: stress"); err != nil {
		return err
	}
	if err := study.WriteReport(stressDir); err != nil {
		return err
	}
	index := filepath.Join(*out, "index.html")
	if err := writeDemoIndex(index, sp, tp); err != nil {
		return err
	}
	if *asJSON {
		b, err := json.MarshalIndent(map[string]any{"format": 1, "index": index,
			"reports": []string{filepath.Join(sizesDir, "report.html"), filepath.Join(stressDir, "report.html")},
			"seconds": time.Since(start).Seconds()}, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return nil
	}
	fmt.Fprintf(ctx.stdout, "demo finished in %s\n", time.Since(start).Round(time.Second))
	if sp.Def.Policy.Source == "fresh" {
		fmt.Fprintln(ctx.stdout, "note: no reference policies found, the demo used untrained networks")
	}
	fmt.Fprintf(ctx.stdout, "report: %s\n", filepath.Join(sizesDir, "report.html"))
	fmt.Fprintf(ctx.stdout, "report: %s\n", filepath.Join(stressDir, "report.html"))
	fmt.Fprintf(ctx.stdout, "open: %s\n", index)
	return nil
}

func writeDemoIndex(path string, sp, tp *study.Plan) error {
	return atomicfile.Write(path, func(w io.Writer) error {
		_, err := fmt.Fprintf(w, `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>tilebench demo</title>
<style>body{font-family:system-ui,sans-serif;max-width:44em;margin:2em auto;padding:0 1em;color:#1d2330}a{color:#1f5fa8}.c{border-left:4px solid #b06a00;padding:.5em 1em;background:#fff6e8}</style></head>
<body><h1>tilebench demo</h1>
<ul>
<li><a href="sizes/report.html">Patch-size study</a>: %s, %d cells × %d episodes, policy %s</li>
<li><a href="stress/report.html">Stress study</a>: %s, %d cells × %d episodes, policy %s</li>
</ul>
<p class="c">%s</p>
</body></html>
`, html.EscapeString(sp.Def.Game), len(sp.Cells), sp.Def.Episodes, html.EscapeString(sp.Def.Policy.Source),
			html.EscapeString(tp.Def.Game), len(tp.Cells), tp.Def.Episodes, html.EscapeString(tp.Def.Policy.Source),
			html.EscapeString(report.Caution))
		return err
	})
}

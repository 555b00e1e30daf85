package runner

import (
	"context"
	"os"
	"path/filepath"
	"testing"
	"tilebench/vision/study"
	"tilebench/vision/study/analysis"
)

// Run takes a sizes study from nothing to its report: episodes, costs,
// analysis and the report files, and hands back the analysis it wrote the
// report from, the same as Analyze reads back from the folder.
func TestRunWholeSizesStudy(t *testing.T) {
	p, err := study.NewPlan(study.Definition{Name: "sizes", Kind: "sizes", Game: "paddle", Episodes: 2, Seed: 1,
		Policy: study.PolicyDef{Source: "fresh", Family: "meanpool"}, Patch: study.Axis{"7,12"},
		Axes:  study.Axes{Occlude: study.Axis{"none,random:0.5"}},
		Stats: study.StatsDef{Resamples: 100}, Strips: []int{}})
	if err != nil {
		t.Fatal(err)
	}
	dir := filepath.Join(t.TempDir(), "s")
	out, err := Run(context.Background(), p, Options{Dir: dir, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if out.Ran != p.Units() || out.Analysis == nil {
		t.Fatalf("outcome %+v", out)
	}
	for _, f := range []string{study.InfoFile, study.ResultsFile, analysis.CostsFile, "report.html", "summary.md", "cells.csv"} {
		if _, err := os.Stat(filepath.Join(dir, f)); err != nil {
			t.Errorf("%s: %v", f, err)
		}
	}
	if len(out.Analysis.Costs) != 2 || out.Analysis.Choice == nil {
		t.Fatalf("costs %v choice %v", out.Analysis.Costs, out.Analysis.Choice)
	}
	back, err := analysis.Analyze(dir)
	if err != nil {
		t.Fatal(err)
	}
	for i, c := range back.Cells {
		got := out.Analysis.Cells[i]
		if len(c.Returns) != len(got.Returns) || c.Summary == nil || got.Summary == nil || c.Summary.IQM.Value != got.Summary.IQM.Value {
			t.Fatalf("cell %d: Run's analysis and Analyze disagree", i)
		}
	}
	// Run again with Resume: nothing is played, the report is made again.
	again, err := Run(context.Background(), p, Options{Dir: dir, Resume: true})
	if err != nil {
		t.Fatal(err)
	}
	if again.Ran != 0 || again.Kept != p.Units() || again.Analysis == nil {
		t.Fatalf("resumed outcome %+v", again)
	}
}

package analysis

import (
	"math"
	"os"
	"path/filepath"
	"testing"

	"tilebench/vision/study"
)

// A study folder written by hand: Analyze counts finished and failed
// episodes per cell, leaves failures out of the scores, and measures
// retention against the clean cell.
func TestAnalyzeHandWrittenFolder(t *testing.T) {
	p, err := study.NewPlan(study.Definition{Name: "t", Game: "paddle", Episodes: 4, Seed: 2,
		Axes: study.Axes{Occlude: study.Axis{"none,random:0.5"}}, Stats: study.StatsDef{Resamples: 200}})
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Cells) != 2 || !p.Cells[0].Clean() {
		t.Fatalf("cells %+v", p.Cells)
	}
	dir := t.TempDir()
	if err := study.WriteInfo(dir, &study.Info{Format: 1, Fingerprint: p.Fingerprint, Definition: p.Def, Cells: p.Cells, Episodes: 4}); err != nil {
		t.Fatal(err)
	}
	returns := [][]float64{{10, 20, 30, 40}, {5, 10, 15, 0}}
	var recs []study.Record
	for c := range 2 {
		for e := range 4 {
			r := study.Record{Format: 1, Study: p.Fingerprint, Cell: c, Episode: e, Params: p.Cells[c], Return: returns[c][e], Steps: 10, End: "completed"}
			if c == 1 && e == 3 {
				r.Failure, r.End = "policy crashed", "error"
			}
			recs = append(recs, r)
		}
	}
	if err := study.WriteResults(dir, recs); err != nil {
		t.Fatal(err)
	}
	a, err := Analyze(dir)
	if err != nil {
		t.Fatal(err)
	}
	clean, occ := a.Cells[0], a.Cells[1]
	if clean.Episodes != 4 || occ.Episodes != 4 || occ.Failures != 1 || len(occ.Returns) != 3 || occ.FailNote != "policy crashed" {
		t.Fatalf("cells %+v / %+v", clean, occ)
	}
	// IQM of 10, 20, 30, 40 is the mean of the middle two, 25 (the
	// interquartile mean as Agarwal et al. 2021 define it, from memory);
	// of 5, 10, 15 it is 10.
	if got := clean.Summary.IQM.Value; math.Abs(got-25) > 1e-9 {
		t.Errorf("clean IQM %v, want 25", got)
	}
	if got := occ.Summary.IQM.Value; math.Abs(got-10) > 1e-9 {
		t.Errorf("occluded IQM %v, want 10", got)
	}
	if occ.Retention == nil || math.Abs(occ.Retention.Value-10.0/25) > 1e-9 {
		t.Errorf("retention %+v, want 0.4", occ.Retention)
	}
	// The report writes from the same analysis.
	if err := WriteReport(dir); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, "report.html")); err != nil {
		t.Fatal(err)
	}
}

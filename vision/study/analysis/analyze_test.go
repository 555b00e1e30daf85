package analysis

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"tilebench/vision/report"
	"tilebench/vision/study"
)

// A study folder written by hand: Analyze counts finished and error
// episodes per cell, scores errors at the worst return, and measures the
// normalised retention against the clean cell, with and without a floor.
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
	// The error episode counts at the worst return played, 5.
	if clean.Episodes != 4 || occ.Episodes != 4 || occ.Failures != 1 || len(occ.Returns) != 4 || occ.FailNote != "policy crashed" ||
		a.WorstReturn != 5 || occ.ByEpisode[3] != 5 || occ.GameFailed.Of != 3 {
		t.Fatalf("cells %+v / %+v", clean, occ)
	}
	// IQM of 10, 20, 30, 40 is the mean of the middle two, 25 (the
	// interquartile mean as Agarwal et al. 2021 define it, from memory);
	// of 5, 5, 10, 15 it is 7.5.
	if got := clean.Summary.IQM.Value; math.Abs(got-25) > 1e-9 {
		t.Errorf("clean IQM %v, want 25", got)
	}
	if got := occ.Summary.IQM.Value; math.Abs(got-7.5) > 1e-9 {
		t.Errorf("occluded IQM %v, want 7.5", got)
	}
	// No floor recorded: the plain ratio 7.5/25.
	if occ.Retention == nil || math.Abs(occ.Retention.Value-7.5/25) > 1e-9 || occ.VsClean == nil || occ.VsClean.Seeds != 4 {
		t.Errorf("retention %+v, want 0.3", occ.Retention)
	}
	// An idle floor at -10 on every seed: (7.5 + 10) / (25 + 10) = 0.5.
	if err := WriteFloors(dir, &FloorTable{Study: p.Fingerprint, Floor: "idle", Floors: []Baseline{{Returns: []float64{-10, -10, -10, -10}}}}); err != nil {
		t.Fatal(err)
	}
	if a, err = Analyze(dir); err != nil {
		t.Fatal(err)
	}
	if r := a.Cells[1].Retention; r == nil || math.Abs(r.Value-0.5) > 1e-9 || a.WorstReturn != -10 {
		t.Errorf("normalised retention %+v (worst %v), want 0.5", r, a.WorstReturn)
	}
	// A floor just under the clean score (IQM 25 over 20): retention is
	// (7.5 − 20) / (25 − 20) = −2.5, with a warning that the ratio is
	// unstable.
	if err := WriteFloors(dir, &FloorTable{Study: p.Fingerprint, Floor: "idle", Floors: []Baseline{{Returns: []float64{20, 20, 20, 20}}}}); err != nil {
		t.Fatal(err)
	}
	if a, err = Analyze(dir); err != nil {
		t.Fatal(err)
	}
	if c := a.Cells[1]; c.Retention == nil || math.Abs(c.Retention.Value+2.5) > 1e-9 || !strings.Contains(c.Warn, "unstable ratio") {
		t.Errorf("retention near the floor: %+v, warning %q", c.Retention, c.Warn)
	}
	// A floor above the clean score: retention is undefined, and says so.
	if err := WriteFloors(dir, &FloorTable{Study: p.Fingerprint, Floor: "idle", Floors: []Baseline{{Returns: []float64{50, 50, 50, 50}}}}); err != nil {
		t.Fatal(err)
	}
	if a, err = Analyze(dir); err != nil {
		t.Fatal(err)
	}
	if c := a.Cells[1]; c.Retention != nil || !strings.Contains(c.Note, "does not exceed the floor") {
		t.Errorf("retention over a clean score below the floor: %+v %q", c.Retention, c.Note)
	}
	rd := a.ReportData(dir)
	if len(rd.Breaks) != 1 || rd.Breaks[0].Note == "" {
		t.Errorf("undefined breaking point not a row saying why: %+v", rd.Breaks)
	}
	// The tables are all there, the undefined retention a row saying why.
	ids := map[string]report.Table{}
	for _, tb := range rd.Tables {
		ids[tb.ID] = tb
	}
	if _, ok := ids["scale"]; !ok {
		t.Error("no normalisation table")
	}
	pt, ok := ids["paired"]
	if !ok || len(pt.Rows) != 1 || !strings.Contains(strings.Join(pt.Rows[0], " "), "does not exceed the floor") {
		t.Errorf("paired table %+v", pt)
	}
	// The report writes from the same analysis.
	if err := WriteReport(dir); err != nil {
		t.Fatal(err)
	}
	if _, err := os.Stat(filepath.Join(dir, "report.html")); err != nil {
		t.Fatal(err)
	}
}

package report

import (
	"bytes"
	"encoding/csv"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"
)

func writeDemo(t *testing.T) (string, *Data) {
	t.Helper()
	dir := t.TempDir()
	d := demoData()
	if err := Write(dir, d); err != nil {
		t.Fatal(err)
	}
	return dir, d
}

// artifactDir is where the Chromium screenshots are kept:
// $TILEBENCH_ARTIFACTS when set, else the test's artifact folder
// (t.ArtifactDir: kept under the output folder with `go test -artifacts`,
// removed after the test otherwise). The path is logged.
func artifactDir(t *testing.T) string {
	if a := os.Getenv("TILEBENCH_ARTIFACTS"); a != "" {
		if err := os.MkdirAll(a, 0o755); err != nil {
			t.Fatal(err)
		}
		return a
	}
	return t.ArtifactDir()
}

func TestWriteDemo(t *testing.T) {
	dir, _ := writeDemo(t)
	for _, f := range []string{HTMLFile, SummaryFile, CSVFile} {
		st, err := os.Stat(filepath.Join(dir, f))
		if err != nil || st.Size() == 0 {
			t.Fatalf("%s: %v", f, err)
		}
	}
	page, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	for _, want := range []string{"<svg ", "data:image/png;base64,", Caution, "Recommended", "Where it breaks", "Breaking point", "Every cell", "Reproduce this run"} {
		if !bytes.Contains(page, []byte(want)) {
			t.Errorf("report.html lacks %q", want)
		}
	}
}

// hostile is an attack string: if it reached the page unescaped it would
// run script that logs to the console (which TestRefChromium watches).
const hostile = `<script>console.error("INJECTED")</script><img src=x onerror=console.error("INJECTED")>"'&|*_` + "`\n# h</title></style>"

// hostileData puts the same attack string into every user-given string
// field of a Data.
func hostileData() *Data {
	d := demoData()
	h := hostile
	d.Title, d.Kind, d.Generated = h, h, h
	d.Run.Command = h
	d.Run.Params = append(d.Run.Params, KV{h, h})
	d.Run.Versions = append(d.Run.Versions, KV{h, h})
	d.Recommendation.Choice, d.Recommendation.Rule, d.Recommendation.Detail = h, h, h
	d.Breaks[0].Axis = h
	d.Findings = append(d.Findings, KV{h, h})
	d.Costs[0].Name = h
	d.Heatmaps[0].Title, d.Heatmaps[0].XLabel, d.Heatmaps[0].YLabel = h, h, h
	d.Heatmaps[0].X[0], d.Heatmaps[0].Y[0] = h, h
	d.Curves[0].Title, d.Curves[0].XLabel, d.Curves[0].YLabel = h, h, h
	d.Curves[0].Series[0].Name = h
	d.Pareto.Title, d.Pareto.XLabel, d.Pareto.YLabel = h, h, h
	d.Pareto.Points[0].Label = h
	d.Strips[0].Title, d.Strips[0].Caption, d.Strips[0].Frames[0].Label = h, h, h
	d.Cells[0].ID, d.Cells[0].Axis, d.Cells[0].Kind, d.Cells[0].Note = h, h, h, h
	d.Cells[0].Params = append(d.Cells[0].Params, KV{h, h})
	d.Notes = append(d.Notes, h)
	return d
}

func TestEscaping(t *testing.T) {
	page, err := HTML(hostileData())
	if err != nil {
		t.Fatal(err)
	}
	for _, bad := range []string{"<script", "<img src=x"} {
		if i := bytes.Index(bytes.ToLower(page), []byte(bad)); i >= 0 {
			t.Errorf("report.html contains %q unescaped: …%s…", bad, page[max(0, i-60):min(len(page), i+60)])
		}
	}
	if !bytes.Contains(page, []byte("&lt;script&gt;")) {
		t.Error("escaped form of the hostile string not found")
	}
	md, err := Markdown(hostileData())
	if err != nil {
		t.Fatal(err)
	}
	// Outside the command's code fence, no raw tag may survive.
	body := string(md)
	if i := strings.Index(body, "```sh"); i >= 0 {
		j := strings.Index(body[i+5:], "```")
		body = body[:i] + body[i+5+j+3:]
	}
	// Every < is backslash-escaped (CommonMark: no tag can start there).
	for i := 0; i < len(body); i++ {
		if body[i] == '<' && (i == 0 || body[i-1] != '\\') {
			t.Fatalf("summary.md carries a raw '<': …%s…", body[max(0, i-40):min(len(body), i+40)])
		}
	}
	if !strings.Contains(body, `\<script\>`) {
		t.Error("escaped hostile string not found in summary.md")
	}
}

func TestSelfContained(t *testing.T) {
	page, err := HTML(demoData())
	if err != nil {
		t.Fatal(err)
	}
	s := string(page)
	for _, bad := range []string{"http:", "https:", "url(", "@import", "<script", "<link rel=\"stylesheet\"", "<iframe"} {
		if strings.Contains(s, bad) {
			i := strings.Index(s, bad)
			t.Errorf("report.html contains %q: …%s…", bad, s[max(0, i-60):min(len(s), i+60)])
		}
	}
	refs := regexp.MustCompile(`(?i)\b(src|href|xlink:href)\s*=\s*"([^"]*)"`).FindAllStringSubmatch(s, -1)
	if len(refs) == 0 {
		t.Fatal("no src/href at all: the test looks at the wrong page")
	}
	for _, m := range refs {
		v := m[2]
		if !strings.HasPrefix(v, "data:") && !strings.HasPrefix(v, "#") {
			t.Errorf("%s=%q points outside the page", m[1], v)
		}
	}
}

func TestCSV(t *testing.T) {
	dir, d := writeDemo(t)
	raw, err := os.ReadFile(filepath.Join(dir, CSVFile))
	if err != nil {
		t.Fatal(err)
	}
	rows, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	if got, want := strings.Join(rows[0], ","), "format,cell,patch,axis,kind,severity,episodes,failures,n,mean,mean_lo,mean_hi,median,median_lo,median_hi,iqm,iqm_lo,iqm_hi,std,min,max,retention,retention_lo,retention_hi,level,resamples,params,note,errors,game_failed,game_failed_lo,game_failed_hi,time_up,time_up_lo,time_up_hi,cvar10,expert_share,expert_share_lo,expert_share_hi,interval_method,warning"; got != want {
		t.Fatalf("header\n%s\nwant (docs/report.md)\n%s", got, want)
	}
	if len(rows) != len(d.Cells)+1 {
		t.Fatalf("%d rows for %d cells", len(rows)-1, len(d.Cells))
	}
	col := map[string]int{}
	for i, c := range rows[0] {
		col[c] = i
	}
	for i, c := range d.Cells {
		r := rows[i+1]
		if r[col["format"]] != CSVFormat || r[col["cell"]] != c.ID || r[col["iqm"]] != csvFloat(c.Summary.IQM.Value) ||
			r[col["iqm_lo"]] != csvFloat(c.Summary.IQM.Lo) || r[col["resamples"]] != "500" || r[col["level"]] != "0.95" {
			t.Fatalf("row %d = %v for cell %+v", i+1, r, c)
		}
		if (c.Retention == nil) != (r[col["retention"]] == "") {
			t.Fatalf("row %d retention %q, cell retention %v", i+1, r[col["retention"]], c.Retention)
		}
	}
	// A hostile ID with quotes, commas and a newline round-trips.
	hd := &Data{Title: "x", Cells: []Cell{{ID: "a,\"b\"\nc", Summary: d.Cells[0].Summary}}}
	raw, _ = CSV(hd)
	rows, err = csv.NewReader(bytes.NewReader(raw)).ReadAll()
	if err != nil || rows[1][1] != hd.Cells[0].ID {
		t.Fatalf("hostile id: %v %q", err, rows)
	}
}

func TestDeterministic(t *testing.T) {
	a, b := t.TempDir(), t.TempDir()
	if err := Write(a, demoData()); err != nil {
		t.Fatal(err)
	}
	if err := Write(b, demoData()); err != nil {
		t.Fatal(err)
	}
	for _, f := range []string{HTMLFile, SummaryFile, CSVFile} {
		x, _ := os.ReadFile(filepath.Join(a, f))
		y, _ := os.ReadFile(filepath.Join(b, f))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs between two writes of the same data", f)
		}
	}
	// And the clock is not read: a Generated time appears only when given.
	page, _ := HTML(demoData())
	if bytes.Contains(page, []byte(time.Now().Format("2006-01-02"))) {
		t.Error("report.html contains today's date without Data.Generated")
	}
}

func TestBadData(t *testing.T) {
	for name, d := range map[string]*Data{
		"nil":      nil,
		"no title": {Title: " "},
		"heat rows": {Title: "x", Heatmaps: []Heatmap{{Title: "h", X: []string{"a"}, Y: []string{"r", "s"},
			Z: [][]float64{{1}}}}},
		"heat cols": {Title: "x", Heatmaps: []Heatmap{{Title: "h", X: []string{"a"}, Y: []string{"r"},
			Z: [][]float64{{1, 2}}}}},
		"log cost":     {Title: "x", Pareto: &Pareto{LogX: true, Points: []ParetoPoint{{Label: "a", Cost: 0}}}},
		"empty curves": {Title: "x", Curves: []Curves{{Title: "c"}}},
	} {
		dir := t.TempDir()
		err := Write(dir, d)
		if err == nil {
			t.Errorf("%s: no error", name)
			continue
		}
		if strings.Contains(err.Error(), "\n") {
			t.Errorf("%s: multi-line error %q", name, err)
		}
		if ents, _ := os.ReadDir(dir); len(ents) != 0 {
			t.Errorf("%s: files left behind after an error: %v", name, ents)
		}
	}
}

func TestMinimal(t *testing.T) {
	// Only a title: every optional section is left out, the caution stays.
	dir := t.TempDir()
	if err := Write(dir, &Data{Title: "bare"}); err != nil {
		t.Fatal(err)
	}
	page, _ := os.ReadFile(filepath.Join(dir, HTMLFile))
	if !bytes.Contains(page, []byte(Caution)) || bytes.Contains(page, []byte(`id="cells"`)) {
		t.Error("minimal report: caution missing or empty sections shown")
	}
	md, _ := os.ReadFile(filepath.Join(dir, SummaryFile))
	if !bytes.Contains(md, []byte("Caution")) {
		t.Error("summary.md lacks the caution")
	}
}

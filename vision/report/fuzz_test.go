package report

import (
	"bytes"
	"encoding/csv"
	"math"
	"strings"
	"testing"
	"unicode/utf8"

	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
)

// FuzzStrings puts arbitrary user strings, between sentinels, into a
// report: in the HTML no '<' or '>' survives raw between the sentinels, in
// summary.md none unescaped (outside the command's code fence), and
// cells.csv gives every cell key back.
func FuzzStrings(f *testing.F) {
	f.Add("patch 8", "p8/occlude=random:0.3")
	f.Add(hostile, "a,\"b\"\nc")
	f.Add("</style><script>x</script>", "```")
	f.Add("<!--", "-->")
	f.Fuzz(func(t *testing.T, a, b string) {
		if !utf8.ValidString(a) || !utf8.ValidString(b) || strings.ContainsRune(b, '\r') ||
			strings.Contains(a+b, "QQ") {
			return
		}
		title, id := "QQ["+a+"]QQ", "QQ["+b+"]QQ"
		sum := stats.Summary{N: 1, Mean: stats.Estimate{Value: 1}, Median: stats.Estimate{Value: 1}, IQM: stats.Estimate{Value: 1, Lo: 1, Hi: 1}}
		d := &Data{Title: title, Kind: id, Run: Run{Command: "run " + title, Params: []KV{{id, title}}},
			Findings: []KV{{id, title}}, Notes: []string{id},
			Breaks: []Break{{Axis: title, Context: id, Break: breakpoint.Break{Reached: true, Severity: 0.5, Threshold: 0.5, Max: 1}},
				{Axis: id + " (patch 8)", Break: breakpoint.Break{Severity: math.NaN(), Threshold: 0.5, Max: 1}}},
			Cells: []Cell{{ID: id, Axis: title, Note: title, Summary: sum}}}
		page, err := HTML(d)
		if err != nil {
			t.Fatal(err)
		}
		// <wbr> is the page's own line-break hint inside cell keys.
		for _, seg := range between(strings.ReplaceAll(string(page), "<wbr>", "")) {
			if strings.ContainsAny(seg, "<>") {
				t.Fatalf("HTML carries a raw < or > in %q", seg)
			}
		}
		md, err := Markdown(d)
		if err != nil {
			t.Fatal(err)
		}
		body := string(md)
		fc := fence(d.Run.Command)
		if i := strings.Index(body, fc+"sh\n"); i >= 0 {
			if j := strings.Index(body[i:], "\n"+fc+"\n"); j >= 0 {
				body = body[:i] + body[i+j+len(fc)+2:]
			}
		}
		for _, seg := range between(body) {
			for i := 0; i < len(seg); i++ {
				if (seg[i] == '<' || seg[i] == '>') && (i == 0 || seg[i-1] != '\\') {
					t.Fatalf("summary.md has a bare < or > in %q", seg)
				}
			}
		}
		raw, err := CSV(d)
		if err != nil {
			t.Fatal(err)
		}
		rows, err := csv.NewReader(bytes.NewReader(raw)).ReadAll()
		if err != nil || len(rows) != 2 || rows[1][1] != id {
			t.Fatalf("cells.csv: %v, rows %q, want id %q", err, rows, id)
		}
	})
}

// between returns the text between each "QQ" and the next "QQ".
func between(s string) []string {
	var out []string
	for {
		i := strings.Index(s, "QQ")
		if i < 0 {
			return out
		}
		j := strings.Index(s[i+2:], "QQ")
		if j < 0 {
			return out
		}
		out = append(out, s[i+2:i+2+j])
		s = s[i+2+j+2:]
	}
}

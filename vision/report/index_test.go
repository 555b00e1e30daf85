package report

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
)

func TestWriteIndexEscapesAndCautions(t *testing.T) {
	path := filepath.Join(t.TempDir(), "index.html")
	err := WriteIndex(path, "runs <1>", []IndexEntry{
		{Href: "a/report.html", Title: "Stress", About: "drive, 2 cells"},
		{Href: `b"x/report.html`, Title: "<b>", About: "policy exec:a & b"},
	})
	if err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	page := string(b)
	for _, want := range []string{`<title>runs &lt;1&gt;</title>`, `<a href="a/report.html">Stress</a>: drive, 2 cells`,
		`href="b&#34;x/report.html"`, `&lt;b&gt;`, `exec:a &amp; b`, "not a safety certification"} {
		if !strings.Contains(page, want) {
			t.Errorf("index lacks %q:\n%s", want, page)
		}
	}
}

package report

import (
	"fmt"
	"html"
	"io"
	"strings"

	"tilebench/internal/atomicfile"
)

// IndexEntry is one study on an index page: a link to its report and a
// line saying what it holds.
type IndexEntry struct {
	// Href is the report's path relative to the index ("sizes/report.html").
	Href string
	// Title is the link text; About the rest of the line.
	Title, About string
}

// WriteIndex writes an HTML page titled title that links to the reports
// of several studies, with the caution, to path (atomically).
func WriteIndex(path, title string, entries []IndexEntry) error {
	return atomicfile.Write(path, func(w io.Writer) error {
		var items strings.Builder
		for _, e := range entries {
			fmt.Fprintf(&items, "<li><a href=\"%s\">%s</a>: %s</li>\n",
				html.EscapeString(e.Href), html.EscapeString(e.Title), html.EscapeString(e.About))
		}
		t := html.EscapeString(title)
		_, err := fmt.Fprintf(w, `<!doctype html>
<html lang="en"><head><meta charset="utf-8"><title>%s</title>
<style>body{font-family:system-ui,sans-serif;max-width:44em;margin:2em auto;padding:0 1em;color:#1d2330}a{color:#1f5fa8}.c{border-left:4px solid #b06a00;padding:.5em 1em;background:#fff6e8}</style></head>
<body><h1>%s</h1>
<ul>
%s</ul>
<p class="c">%s</p>
</body></html>
`, t, t, items.String(), html.EscapeString(Caution))
		return err
	})
}

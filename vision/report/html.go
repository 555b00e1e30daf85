package report

import (
	"bytes"
	_ "embed"
	"fmt"
	"html/template"
)

// FontSans and FontMono are the only font stacks the report's pages and
// charts name: the system's own interface face and the generic families,
// so nothing depends on a font a vendor ships.
const (
	FontSans = "system-ui, sans-serif"
	FontMono = "monospace"
)

//go:embed page.tmpl
var pageSource string

// page is parsed once; html/template escapes every value by context.
var page = template.Must(template.New("page").Funcs(template.FuncMap{
	"mul100": func(v float64) float64 { return v * 100 },
}).Parse(pageSource))

// HTML returns the bytes of report.html: one self-contained page (styles
// inline, charts as inline SVG, frames as data: PNG, no script, no
// external reference).
func HTML(d *Data) ([]byte, error) {
	v, err := buildView(d)
	if err != nil {
		return nil, err
	}
	var buf bytes.Buffer
	if err := page.Execute(&buf, v); err != nil {
		return nil, fmt.Errorf("report.html: %w", err)
	}
	return buf.Bytes(), nil
}

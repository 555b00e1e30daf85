package watch

import (
	_ "embed"
	"fmt"
	"html/template"
	"net/http"

	"tilebench/games"
	"tilebench/vision/overlay"
	"tilebench/vision/report"
)

//go:embed page.html
var pageSource string

// pageTmpl escapes every value it inserts (html/template), in HTML text,
// attributes and the script's JSON alike.
var pageTmpl = template.Must(template.New("page").Parse(pageSource))

type pageData struct {
	Game, Policy, Grid, Spec, Overlay string
	Actions                           []string
	Severity                          float64
	SeverityOK, Discrete              bool
	Seed                              string
	FPS                               float64
	Ink, Amber, Ring                  string
	Caution                           string
}

func cssColour(r, g, b uint8) string { return fmt.Sprintf("#%02x%02x%02x", r, g, b) }

func (v *Viewer) page(w http.ResponseWriter, r *http.Request) {
	sp := v.cfg.Game.Spec()
	d := pageData{
		Game: sp.Name, Policy: v.cfg.PolicyName, Grid: v.cfg.Grid.String(), Spec: v.cfg.Spec.String(),
		Overlay: v.cfg.Overlay.String(), Actions: sp.Action.Names, Severity: v.loop.sev0, Discrete: sp.Action.Kind == games.Discrete,
		SeverityOK: v.loop.sevOK, Seed: fmt.Sprint(v.cfg.Seed), FPS: v.cfg.FPS,
		Ink:     cssColour(overlay.Ink.R, overlay.Ink.G, overlay.Ink.B),
		Amber:   cssColour(overlay.Amber.R, overlay.Amber.G, overlay.Amber.B),
		Ring:    cssColour(overlay.Ring.R, overlay.Ring.G, overlay.Ring.B),
		Caution: report.Caution,
	}
	if sp.Variation != "" {
		d.Game += " (" + sp.Variation + ")"
	}
	w.Header().Set("Content-Type", "text/html; charset=utf-8")
	w.Header().Set("Cache-Control", "no-store")
	// Everything is inline; nothing may load from elsewhere.
	w.Header().Set("Content-Security-Policy", "default-src 'none'; img-src data:; style-src 'unsafe-inline'; script-src 'unsafe-inline'; connect-src 'self'; base-uri 'none'; form-action 'none'; frame-ancestors 'none'")
	if err := pageTmpl.Execute(w, d); err != nil {
		http.Error(w, "page: "+err.Error(), http.StatusInternalServerError)
	}
}

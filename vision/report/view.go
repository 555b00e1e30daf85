package report

import (
	"bytes"
	"cmp"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"image/color"
	"image/png"
	"math"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/plot/palette"
	"gonum.org/v1/plot/palette/moreland"

	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
)

// view is Data turned into display strings; both the HTML and the Markdown
// are printed from it.
type view struct {
	*Data
	Episodes  int
	Resamples int
	Level     float64
	Breaks    []breakView
	BreakRule string
	Facts     []KV
	MoreFacts []KV
	Costs     []costView
	Pareto    *chartView
	Heatmaps  []heatView
	Curves    []chartView
	Strips    []stripView
	Cells     []cellView
	Tables    []tableView
	Nav       []navItem
	Caution   string
	Units     string
	Glance    bool
}

type navItem struct{ ID, Name string }

// breakView is one row of the "Where it breaks" table.
type breakView struct {
	Axis, Context string
	// Big is the breaking severity or "not reached"; Sub qualifies it
	// ("up to 1", or the threshold when it differs from the common one);
	// Text says it all in one phrase (summary.md, tooltips).
	Big, Sub, Text string
	// Dip is the first-dip severity (the point estimate alone below the
	// threshold), a secondary figure.
	Dip     string
	Reached bool
	// Undefined marks a row whose breaking point could not be computed
	// (Sub says why).
	Undefined bool
}

// maxFactCards is the most headline facts shown as cards of their own.
const maxFactCards = 3

// splitContext takes "axis (context)" apart at the parenthesised part
// that closes the string; without one the context is empty.
func splitContext(s string) (axis, context string) {
	if !strings.HasSuffix(s, ")") {
		return s, ""
	}
	depth := 0
	for i := len(s) - 1; i >= 0; i-- {
		switch s[i] {
		case ')':
			depth++
		case '(':
			depth--
			if depth == 0 {
				a := strings.TrimSpace(s[:i])
				if a == "" {
					return s, ""
				}
				return a, s[i+1 : len(s)-1]
			}
		}
	}
	return s, ""
}

// buildBreaks fills the breaking-point table: the earliest breaks first
// (ascending severity), then the axes that held, in the order given, and
// last the rows whose context alone had already broken the policy at the
// axis's first severity (they say nothing about the axis itself).
func (v *view) buildBreaks(bs []Break) {
	sorted := slices.Clone(bs)
	preBroken := func(b Break) bool {
		ctx := b.Context
		if ctx == "" {
			_, ctx = splitContext(b.Axis)
		}
		// Severity 0 is every axis's identity (no stress on that axis).
		return b.Break.AtStart() && b.Break.Min == 0 && ctx != ""
	}
	slices.SortStableFunc(sorted, func(a, b Break) int {
		switch pa, pb := preBroken(a), preBroken(b); {
		case pa != pb:
			if pa {
				return 1
			}
			return -1
		case a.Break.Reached && b.Break.Reached:
			return cmp.Compare(a.Break.Severity, b.Break.Severity)
		case a.Break.Reached:
			return -1
		case b.Break.Reached:
			return 1
		}
		return 0
	})
	thOf := func(b Break) float64 {
		if b.Break.Threshold == 0 {
			return breakpoint.DefaultBreakThreshold
		}
		return b.Break.Threshold
	}
	// The common threshold is the most frequent one (the first of equals).
	common, best := 0.0, 0
	for _, b := range sorted {
		n := 0
		for _, o := range sorted {
			if thOf(o) == thOf(b) {
				n++
			}
		}
		if n > best {
			common, best = thOf(b), n
		}
	}
	if len(sorted) > 0 {
		v.BreakRule = "Breaking point: the first measured severity whose whole retention interval lies below " + num(common) +
			" (retention normalised between the floor policy and the clean score, paired over seeds); earliest first. " +
			"Not reached: no interval lay wholly below it up to the largest severity measured. " +
			"First dip: the first severity whose point estimate alone is below it, which follows the noise of the curve."
	}
	if v.Data.BreakRule != "" {
		v.BreakRule = v.Data.BreakRule
	}
	for _, b := range sorted {
		th := thOf(b)
		bv := breakView{Reached: b.Break.Reached, Context: b.Context, Dip: b.Break.DipString()}
		if b.Note != "" {
			bv.Axis, bv.Context = b.Axis, b.Context
			if bv.Context == "" {
				bv.Axis, bv.Context = splitContext(b.Axis)
			}
			bv.Big, bv.Dip, bv.Text, bv.Undefined = "undefined", "—", b.Note, true
			bv.Sub = b.Note
			v.Breaks = append(v.Breaks, bv)
			continue
		}
		bv.Axis = b.Axis
		if bv.Context == "" {
			bv.Axis, bv.Context = splitContext(b.Axis)
		}
		var qual []string
		if preBroken(b) {
			bv.Big = num(b.Break.Severity)
			qual = append(qual, "broken by the context alone")
			bv.Text = fmt.Sprintf("%s: retention already below %s there, from the context alone", num(b.Break.Severity), num(th))
		} else if b.Break.Reached {
			bv.Big = num(b.Break.Severity)
			bv.Text = fmt.Sprintf("%s (retention below %s)", num(b.Break.Severity), num(th))
		} else {
			bv.Big = "not reached"
			qual = append(qual, "up to "+num(b.Break.Max))
			bv.Text = fmt.Sprintf("not reached (retention ≥ %s up to %s)", num(th), num(b.Break.Max))
		}
		if th != common {
			qual = append(qual, "threshold "+num(th))
		}
		bv.Sub = strings.Join(qual, ", ")
		v.Breaks = append(v.Breaks, bv)
	}
}

type costView struct {
	Name, Patch, Tokens, MFLOP, Params, Latency, Score string
	Pick, OverBudget                                   bool
}

type chartView struct {
	Title, Caption string
	SVG            template.HTML
	Legend         []legendView
}

type legendView struct {
	Name, Kind string
	Style      template.CSS
}

func legendViews(items []legendItem) []legendView {
	out := make([]legendView, len(items))
	for i, it := range items {
		out[i] = legendView{Name: it.Name, Kind: it.Kind, Style: template.CSS("--c:" + it.Color)}
	}
	return out
}

type heatView struct {
	Title, XLabel, YLabel string
	X                     []string
	Rows                  []heatRow
	Lo, Hi, Same          string
	Scale                 template.CSS
}

type heatRow struct {
	Label string
	Cells []heatCell
}

type heatCell struct {
	Text, Tip string
	Style     template.CSS
	Missing   bool
}

type stripView struct {
	Title, Caption string
	Frames         []frameView
}

type frameView struct {
	Label string
	Src   template.URL
	W, H  int
}

type cellView struct {
	Fail, TimeUp, CVaR, Expert, Warn          string
	ID, Axis, Kind, Severity, Patch           string
	Episodes, Failures                        int
	IQM, IQMText, Mean, MeanText, Median, Std string
	RetText, Ret, RetClass                    string
	Bar, Dot                                  template.CSS
	Note, Params                              string
	HasBar                                    bool
	IDParts                                   []string
}

// heatColors maps low scores to ember and high ones to lagoon through a
// pale midpoint (Moreland's smooth diverging map, from gonum/plot).
func heatColors() palette.DivergingColorMap {
	return moreland.NewSmoothDiverging(
		color.NRGBA{0xc0, 0x52, 0x1c, 0xff},
		color.NRGBA{0x0b, 0x6e, 0x8a, 0xff}, 88)
}

func cssColor(c color.Color) string {
	r, g, b, _ := c.RGBA()
	return fmt.Sprintf("#%02x%02x%02x", r>>8, g>>8, b>>8)
}

// darkish reports whether white text reads better than ink on c
// (relative luminance below 0.45, WCAG's formula, common practice).
func darkish(c color.Color) bool {
	r, g, b, _ := c.RGBA()
	lin := func(v uint32) float64 {
		x := float64(v) / 65535
		if x <= 0.03928 {
			return x / 12.92
		}
		return math.Pow((x+0.055)/1.055, 2.4)
	}
	return 0.2126*lin(r)+0.7152*lin(g)+0.0722*lin(b) < 0.3
}

func buildView(d *Data) (*view, error) {
	if d == nil {
		return nil, errors.New("report: no data")
	}
	if strings.TrimSpace(d.Title) == "" {
		return nil, errors.New("report: the title is empty")
	}
	v := &view{Data: d, Caution: Caution, Episodes: d.Run.Episodes, Units: "episodes"}
	if d.Units != "" {
		v.Units = d.Units
	}
	if v.Episodes == 0 {
		for _, c := range d.Cells {
			v.Episodes += c.Episodes
		}
	}
	v.Glance = d.Recommendation != nil || len(d.Breaks) > 0 || len(d.Findings) > 0
	v.buildBreaks(d.Breaks)
	v.Facts = d.Findings
	if len(v.Facts) > maxFactCards {
		// A wall of cards reads worse than a list: the first few keep
		// their cards, the rest share one.
		v.Facts, v.MoreFacts = d.Findings[:maxFactCards-1], d.Findings[maxFactCards-1:]
	}
	for _, c := range d.Costs {
		cv := costView{Name: c.Name, Pick: c.Pick, OverBudget: c.OverBudget,
			Patch: intText(c.Patch), Tokens: intText(c.Tokens), Params: groupInt(c.Params),
			MFLOP: numOrBlank(c.MFLOP), Latency: numOrBlank(c.LatencyUS),
			Score: estText(c.Score.Value, c.Score.Lo, c.Score.Hi)}
		if math.IsNaN(c.Score.Value) {
			cv.Score = "—"
		}
		v.Costs = append(v.Costs, cv)
	}
	if err := v.buildCharts(d); err != nil {
		return nil, err
	}
	for i, h := range d.Heatmaps {
		hv, err := buildHeat(h)
		if err != nil {
			return nil, fmt.Errorf("report: heatmap %d %q: %w", i+1, h.Title, err)
		}
		v.Heatmaps = append(v.Heatmaps, hv)
	}
	for i, s := range d.Strips {
		sv := stripView{Title: s.Title, Caption: s.Caption}
		for j, f := range s.Frames {
			if f.Image == nil {
				continue
			}
			var buf bytes.Buffer
			if err := png.Encode(&buf, f.Image); err != nil {
				return nil, fmt.Errorf("report: strip %d frame %d: %w", i+1, j+1, err)
			}
			b := f.Image.Bounds()
			scale := 1
			for b.Dx()*scale < 132 && scale < 6 {
				scale++
			}
			sv.Frames = append(sv.Frames, frameView{Label: f.Label,
				Src: template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(buf.Bytes())),
				W:   b.Dx() * scale, H: b.Dy() * scale})
		}
		v.Strips = append(v.Strips, sv)
	}
	v.buildCells(d)
	for _, t := range d.Tables {
		tv := tableView{Table: t, Short: t.Nav}
		if tv.Short == "" {
			tv.Short = t.Title
			if i := strings.IndexAny(t.Title, ":("); i > 0 {
				tv.Short = strings.TrimSpace(t.Title[:i])
			}
		}
		for r, row := range t.Rows {
			if len(row) != len(t.Columns) {
				return nil, fmt.Errorf("report: table %q row %d has %d cells for %d columns", t.Title, r+1, len(row), len(t.Columns))
			}
		}
		v.Tables = append(v.Tables, tv)
	}
	v.nav()
	return v, nil
}

func (v *view) buildCharts(d *Data) error {
	if pa := d.Pareto; pa != nil && len(pa.Points) > 0 {
		title := pa.Title
		if title == "" {
			title = "Score against cost"
		}
		for _, q := range pa.Points {
			if !finite(q.Cost, q.Score.Value) {
				return fmt.Errorf("report: Pareto point %q has cost %v, score %v", q.Label, q.Cost, q.Score.Value)
			}
			if pa.LogX && q.Cost <= 0 {
				return fmt.Errorf("report: Pareto point %q: cost %v on a log axis", q.Label, q.Cost)
			}
		}
		front := paretoFront(pa)
		svg, leg, err := paretoSVG(pa, front, title)
		if err != nil {
			return fmt.Errorf("report: %w", err)
		}
		names := make([]string, len(front))
		for i, k := range front {
			names[i] = pa.Points[k].Label
		}
		v.Pareto = &chartView{Title: title, SVG: svg, Legend: legendViews(leg),
			Caption: "On the Pareto front (no other candidate is both cheaper and better): " + strings.Join(names, ", ") + "."}
	}
	for i, c := range d.Curves {
		svg, leg, note, err := curvesSVG(c)
		if err != nil {
			return fmt.Errorf("report: curves %d: %w", i+1, err)
		}
		v.Curves = append(v.Curves, chartView{Title: c.Title, SVG: svg, Legend: legendViews(leg), Caption: note})
	}
	return nil
}

func buildHeat(h Heatmap) (heatView, error) {
	if len(h.Z) != len(h.Y) {
		return heatView{}, fmt.Errorf("%d rows of values for %d row labels", len(h.Z), len(h.Y))
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for r, row := range h.Z {
		if len(row) != len(h.X) {
			return heatView{}, fmt.Errorf("row %d has %d values for %d columns", r+1, len(row), len(h.X))
		}
		for _, z := range row {
			if finite(z) {
				lo, hi = math.Min(lo, z), math.Max(hi, z)
			}
		}
	}
	show := num
	if h.Format != "" {
		show = func(z float64) string { return fmt.Sprintf(h.Format, z) }
	}
	hv := heatView{Title: h.Title, XLabel: h.XLabel, YLabel: h.YLabel, X: h.X}
	cmap := heatColors()
	cmap.SetMin(0)
	cmap.SetMax(1)
	at := func(t float64) color.Color {
		c, err := cmap.At(math.Max(0, math.Min(1, t)))
		if err != nil {
			return color.Gray{0xcc}
		}
		return c
	}
	for r, row := range h.Z {
		hr := heatRow{Label: h.Y[r]}
		for _, z := range row {
			if !finite(z) {
				hr.Cells = append(hr.Cells, heatCell{Text: "—", Missing: true, Tip: "no data"})
				continue
			}
			t := 0.5
			if hi > lo {
				t = (z - lo) / (hi - lo)
			}
			c := at(t)
			fg := "#1f2630"
			if darkish(c) {
				fg = "#ffffff"
			}
			hr.Cells = append(hr.Cells, heatCell{Text: show(z),
				Tip:   strconv.FormatFloat(z, 'g', -1, 64),
				Style: template.CSS("background:" + cssColor(c) + ";color:" + fg)})
		}
		hv.Rows = append(hv.Rows, hr)
	}
	switch {
	case lo == hi:
		hv.Same = "every measured cell holds " + show(lo)
	case lo < hi:
		hv.Lo, hv.Hi = show(lo), show(hi)
		var stops []string
		for i := 0; i <= 8; i++ {
			stops = append(stops, cssColor(at(float64(i)/8)))
		}
		hv.Scale = template.CSS("background:linear-gradient(90deg," + strings.Join(stops, ",") + ")")
	}
	return hv, nil
}

func (v *view) buildCells(d *Data) {
	lo, hi := math.Inf(1), math.Inf(-1)
	th := 0.5
	if len(d.Breaks) > 0 && d.Breaks[0].Break.Threshold > 0 {
		th = d.Breaks[0].Break.Threshold
	}
	for _, c := range d.Cells {
		s := c.Summary.IQM
		if c.Summary.N > 0 && finite(s.Lo, s.Hi) {
			lo, hi = math.Min(lo, s.Lo), math.Max(hi, s.Hi)
		}
		if c.Summary.N > 0 && v.Resamples == 0 {
			v.Resamples, v.Level = s.Resamples, s.Level
		}
	}
	pos := func(x float64) float64 {
		if !(hi > lo) {
			return 50
		}
		return 100 * (x - lo) / (hi - lo)
	}
	for _, c := range d.Cells {
		s := c.Summary
		cv := cellView{ID: c.ID, IDParts: breakable(c.ID), Axis: c.Axis, Kind: c.Kind, Patch: intText(c.Patch),
			Episodes: c.Episodes, Failures: c.Failures, Note: c.Note, Params: joinParams(c.Params),
			IQM: "—", IQMText: "—", Mean: "—", MeanText: "—", Median: "—", Std: "—",
			RetText: "—", Ret: "—", Fail: rateText(c.GameFailed), TimeUp: rateText(c.TimeUp), CVaR: "—", Expert: "—", Warn: c.Warn}
		if c.CVaR != nil && finite(*c.CVaR) {
			cv.CVaR = num(*c.CVaR)
		}
		if e := c.Expert; e != nil {
			cv.Expert = estText(e.Value, e.Lo, e.Hi)
		}
		if c.Axis != "" && c.Axis != "clean" {
			cv.Severity = num(c.Severity)
		}
		if s.N > 0 {
			cv.IQM = num(s.IQM.Value)
			cv.IQMText = estText(s.IQM.Value, s.IQM.Lo, s.IQM.Hi)
			cv.Mean = num(s.Mean.Value)
			cv.MeanText = estText(s.Mean.Value, s.Mean.Lo, s.Mean.Hi)
			cv.Median, cv.Std = num(s.Median.Value), num(s.Std)
			if finite(s.IQM.Lo, s.IQM.Hi) {
				a, b := pos(s.IQM.Lo), pos(s.IQM.Hi)
				cv.HasBar = true
				cv.Bar = template.CSS(fmt.Sprintf("left:%.1f%%;width:%.1f%%", a, math.Max(b-a, 0.8)))
				cv.Dot = template.CSS(fmt.Sprintf("left:%.1f%%", pos(s.IQM.Value)))
			}
		}
		if r := c.Retention; r != nil {
			cv.Ret = num(r.Value)
			cv.RetText = estText(r.Value, r.Lo, r.Hi)
			switch {
			case r.Value < th:
				cv.RetClass = "bad"
			case r.Value < 0.8:
				cv.RetClass = "warn"
			default:
				cv.RetClass = "good"
			}
		}
		v.Cells = append(v.Cells, cv)
	}
}

func (v *view) nav() {
	add := func(ok bool, id, name string) {
		if ok {
			v.Nav = append(v.Nav, navItem{id, name})
		}
	}
	add(len(v.Costs) > 0, "cost", "Cost")
	add(v.Pareto != nil, "frontier", "Score vs compute")
	add(len(v.Heatmaps) > 0, "map", "Score map")
	add(len(v.Curves) > 0, "decline", "Under stress")
	add(len(v.Strips) > 0, "seen", "What it saw")
	for _, t := range v.Tables {
		add(t.ID != "", t.ID, t.Short)
	}
	add(len(v.Cells) > 0, "cells", "Every cell")
	add(true, "reproduce", "Reproduce")
}

type tableView struct {
	Table
	Short string
}

// rateText is "3/30 · 10% [3.5, 26]", "—" when nothing was counted.
func rateText(r stats.Rate) string {
	if r.Of == 0 {
		return "—"
	}
	return fmt.Sprintf("%d/%d · %s%% [%s, %s]", r.Count, r.Of, num(100*r.Value), num(100*r.Lo), num(100*r.Hi))
}

func intText(n int) string {
	if n == 0 {
		return ""
	}
	return strconv.Itoa(n)
}

// groupInt writes n with thin-space thousands groups ("1 234 567").
func groupInt(n int) string {
	if n == 0 {
		return ""
	}
	s := strconv.Itoa(n)
	neg := strings.HasPrefix(s, "-")
	s = strings.TrimPrefix(s, "-")
	var out []string
	for len(s) > 3 {
		out = append([]string{s[len(s)-3:]}, out...)
		s = s[:len(s)-3]
	}
	out = append([]string{s}, out...)
	r := strings.Join(out, "\u2009")
	if neg {
		r = "−" + r
	}
	return r
}

func numOrBlank(v float64) string {
	if v == 0 {
		return ""
	}
	return num(v)
}

// breakable splits s after the separators of a cell key ("/", "=", ":",
// ";", ",") so the page can offer line breaks there.
func breakable(s string) []string {
	var parts []string
	start := 0
	for i := 0; i < len(s); i++ {
		if strings.IndexByte("/=:;,", s[i]) >= 0 {
			parts = append(parts, s[start:i+1])
			start = i + 1
		}
	}
	return append(parts, s[start:])
}

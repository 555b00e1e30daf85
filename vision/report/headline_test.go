package report

import (
	"math"
	"regexp"
	"strconv"
	"strings"
	"testing"

	"tilebench/vision/stats/breakpoint"
)

// wideCurves is a retention chart whose one interval reaches 125 (its
// clean score's interval comes near 0), while every estimate is ≤ 1.2.
func wideCurves() Curves {
	return Curves{Title: "Retention against ratio", XLabel: "ratio", YLabel: "retention", Threshold: 0.5,
		Series: []Series{
			{Name: "wide", Points: []CurvePoint{{0.25, 1.2, 0.02, 125}, {0.5, 0.9, 0.3, 2.1}, {0.75, 0.4, 0.1, 0.8}}},
			{Name: "narrow", Points: []CurvePoint{{0.25, 1.0, 0.9, 1.1}, {0.5, 0.8, 0.7, 0.9}, {0.75, 0.6, 0.5, 0.7}}},
		}}
}

var svgText = regexp.MustCompile(`>([^<>]*)</text>`)

// numbersDrawn returns the numeric labels of an SVG chart (tick labels).
func numbersDrawn(svg string) []float64 {
	var out []float64
	for _, m := range svgText.FindAllStringSubmatch(svg, -1) {
		if v, err := strconv.ParseFloat(strings.TrimSpace(m[1]), 64); err == nil {
			out = append(out, v)
		}
	}
	return out
}

func TestCurveRange(t *testing.T) {
	inf := math.Inf(1)
	for _, c := range []struct {
		name                     string
		minY, maxY, minLo, maxHi float64
		th                       float64
		lo, hiMin, hiMax         float64
	}{
		// The case seen in a real report: estimates ≤ 1.2, one upper end 125.
		{"wide interval", 0.4, 1.2, 0.02, 125, 0.5, 0, 1.32, 1.75},
		{"unbounded interval", 0.4, 1.2, 0.02, inf, 0.5, 0, 1.32, 1.75},
		// Retention never drops below the 1.25 floor; bands within it fit.
		{"narrow", 0.3, 0.9, 0.2, 1.0, 0.5, 0, 1.25, 1.25},
		// A huge estimate is capped at 4 (bands stretch a fifth beyond).
		{"capped", 0.5, 30, 0.1, 40, 0.5, 0, 4, 5},
		// A score chart (no threshold) follows its estimates, from 0.
		{"scores", 300, 600, 250, 620, 0, 0, 660, 700},
	} {
		lo, hi := curveRange(c.minY, c.maxY, c.minLo, c.maxHi, c.th)
		if lo != c.lo || hi < c.hiMin-1e-12 || hi > c.hiMax+1e-12 {
			t.Errorf("%s: range [%v, %v], want [%v, %v…%v]", c.name, lo, hi, c.lo, c.hiMin, c.hiMax)
		}
	}
	// Negative scores: the bottom goes below the lowest estimate.
	if lo, hi := curveRange(-50, 100, -60, 110, 0); !(lo < -50 && lo >= -100 && hi >= 110) {
		t.Errorf("negative scores: range [%v, %v]", lo, hi)
	}
}

func TestCurveClipping(t *testing.T) {
	svg, leg, note, err := curvesSVG(wideCurves())
	if err != nil {
		t.Fatal(err)
	}
	s := string(svg)
	nums := numbersDrawn(s)
	if len(nums) < 4 {
		t.Fatalf("only %d numeric labels drawn: %v", len(nums), nums)
	}
	top := 0.0
	for _, v := range nums {
		top = math.Max(top, v)
	}
	// Without the fixed range the axis would run to 125 (labels 50, 100).
	if top > 2 || top < 1 {
		t.Errorf("largest axis label %v, want the axis to stay within [1, 2]: %v", top, nums)
	}
	if !strings.Contains(note, "clipped") || !strings.Contains(note, "125") {
		t.Errorf("clip note %q should say what was clipped and how far it reached (125)", note)
	}
	if !strings.Contains(note, "2 interval ends") {
		t.Errorf("clip note %q: two upper ends (125 and 2.1) exceed the axis", note)
	}
	found := false
	for _, it := range leg {
		found = found || it.Kind == "clip"
	}
	if !found {
		t.Error("legend lacks the clipped-end marker")
	}
	// Bands are drawn before every line, so no band covers a line.
	lastBand := strings.LastIndex(s, "fill-opacity:0.")
	firstLine := strings.Index(s, "stroke-width:2\"")
	if lastBand < 0 || firstLine < 0 || lastBand > firstLine {
		t.Errorf("last band at %d, first series line at %d: bands must come first", lastBand, firstLine)
	}

	// The note reaches the page, escaped, under the chart.
	d := demoData()
	d.Curves = []Curves{wideCurves()}
	page, err := HTML(d)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(string(page), "the highest reaches 125") {
		t.Error("report.html lacks the clip note")
	}

	// Nothing beyond the axis: no note, no marker.
	c := wideCurves()
	c.Series = c.Series[1:]
	_, leg, note, err = curvesSVG(c)
	if err != nil {
		t.Fatal(err)
	}
	if note != "" {
		t.Errorf("narrow intervals gave a clip note %q", note)
	}
	for _, it := range leg {
		if it.Kind == "clip" {
			t.Error("narrow intervals gave a clip marker in the legend")
		}
	}
}

func breaksData() *Data {
	d := demoData()
	d.Breaks = []Break{
		{Axis: "scrambled fraction (patch 8)", Break: breakpoint.Break{Severity: math.NaN(), Threshold: 0.5, Max: 1}},
		{Axis: "random occlusion ratio (patch 4, scramble full)", Break: breakpoint.Break{Reached: true, Severity: 0.5, Threshold: 0.5, Max: 0.75}},
		{Axis: "block occlusion ratio", Context: "patch 16", Break: breakpoint.Break{Reached: true, Severity: 0.2, Threshold: 0.5, Max: 0.4}},
		{Axis: "random occlusion ratio (patch 8)", Break: breakpoint.Break{Reached: true, Severity: 0.75, Threshold: 0.3, Max: 0.75}},
		// Broken at severity 0: the occlusion in its context alone did it.
		{Axis: "scrambled fraction (patch 8, occlude random:0.5)", Break: breakpoint.Break{Reached: true, Severity: 0, Threshold: 0.5, Max: 1}},
	}
	d.Findings = []KV{{"f1", "v1"}, {"f2", "v2"}, {"f3", "v3"}, {"f4", "v4"}, {"f5", "v5"}}
	return d
}

var (
	brkRow  = regexp.MustCompile(`<tr class="(broke|held)"[^>]*><td>([^<]*)</td><td class="fine">([^<]*)</td><td class="n"><span class="pill (bad|good)">([^<]*)</span>`)
	factCrd = regexp.MustCompile(`<div class="card fact">`)
)

func TestBreakTable(t *testing.T) {
	page, err := HTML(breaksData())
	if err != nil {
		t.Fatal(err)
	}
	s := string(page)
	if n := strings.Count(s, "Where it breaks"); n != 1 {
		t.Errorf("%d breaking-point cards, want one", n)
	}
	if strings.Contains(s, "Breaking point ·") {
		t.Error("a card per breaking point is still drawn")
	}
	rows := brkRow.FindAllStringSubmatch(s, -1)
	want := [][5]string{ // class, axis, context, pill, value: earliest break first, held next,
		// broken by the context alone last
		{"broke", "block occlusion ratio", "patch 16", "bad", "0.2"},
		{"broke", "random occlusion ratio", "patch 4, scramble full", "bad", "0.5"},
		{"broke", "random occlusion ratio", "patch 8", "bad", "0.75"},
		{"held", "scrambled fraction", "patch 8", "good", "not reached"},
		{"broke", "scrambled fraction", "patch 8, occlude random:0.5", "bad", "0"},
	}
	if len(rows) != len(want) {
		t.Fatalf("%d rows in the breaking-point table, want %d", len(rows), len(want))
	}
	for i, w := range want {
		got := [5]string{rows[i][1], rows[i][2], rows[i][3], rows[i][4], rows[i][5]}
		if got != w {
			t.Errorf("row %d: %q, want %q", i+1, got, w)
		}
	}
	if !strings.Contains(s, `0</span> <span class="fine">broken by the context alone</span>`) {
		t.Error("the row broken at severity 0 does not say its context broke it")
	}
	// The row whose threshold differs from the others says so.
	if !strings.Contains(s, `0.75</span> <span class="fine">threshold 0.3</span>`) {
		t.Error("the odd threshold (0.3) is not shown on its row")
	}
	if !strings.Contains(s, "whole retention interval lies below 0.5") {
		t.Error("the common threshold is not stated")
	}
	// Five findings: two cards plus one shared card, not five.
	if n := len(factCrd.FindAllString(s, -1)); n != 3 {
		t.Errorf("%d fact cards for 5 findings, want 3", n)
	}
	if !strings.Contains(s, "<dt>f5</dt><dd>v5</dd>") {
		t.Error("the fifth finding is lost")
	}

	md, err := Markdown(breaksData())
	if err != nil {
		t.Fatal(err)
	}
	m := string(md)
	i1 := strings.Index(m, "| block occlusion ratio | patch 16 | **0.2** |")
	i2 := strings.Index(m, "| random occlusion ratio | patch 8 | **0.75** (threshold 0.3) |")
	i3 := strings.Index(m, "| scrambled fraction | patch 8 | not reached (up to 1) |")
	if i1 < 0 || i2 < i1 || i3 < i2 {
		t.Errorf("summary.md breaking-point table missing or out of order (%d, %d, %d):\n%s", i1, i2, i3, m)
	}
}

func TestSplitContext(t *testing.T) {
	for _, c := range [][3]string{
		{"random occlusion ratio (patch 8)", "random occlusion ratio", "patch 8"},
		{"a (b (c)) (d, e)", "a (b (c))", "d, e"},
		{"a (b (c))", "a", "b (c)"},
		{"plain", "plain", ""},
		{"(only)", "(only)", ""},
		{"odd)", "odd)", ""},
	} {
		a, ctx := splitContext(c[0])
		if a != c[1] || ctx != c[2] {
			t.Errorf("splitContext(%q) = %q, %q; want %q, %q", c[0], a, ctx, c[1], c[2])
		}
	}
}

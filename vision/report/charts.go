package report

import (
	"bytes"
	"cmp"
	"fmt"
	"html/template"
	"image/color"
	"math"
	"regexp"
	"slices"
	"strconv"
	"strings"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgsvg"

	"tilebench/vision/stats/choose"
)

// The chart palette: our own, chosen for contrast on the page's paper
// background and to stay apart for common colour-vision deficiencies
// (roughly following the blue/orange split of common practice).
var seriesColors = []color.RGBA{
	{0x0b, 0x6e, 0x8a, 0xff}, // deep lagoon
	{0xd0, 0x6a, 0x1f, 0xff}, // ember
	{0x6b, 0x4c, 0xc2, 0xff}, // iris
	{0x3f, 0x8f, 0x3a, 0xff}, // moss
	{0xb8, 0x3a, 0x6b, 0xff}, // plum
	{0x8a, 0x6d, 0x1c, 0xff}, // ochre
	{0x2f, 0x4b, 0xa0, 0xff}, // ink blue
	{0x5e, 0x6b, 0x73, 0xff}, // slate
}

var (
	inkColor   = color.RGBA{0x1f, 0x26, 0x30, 0xff}
	mutedColor = color.RGBA{0x6b, 0x72, 0x7c, 0xff}
	gridColor  = color.RGBA{0xe4, 0xe0, 0xd6, 0xff}
	pickColor  = color.RGBA{0xd0, 0x6a, 0x1f, 0xff}
	alertColor = color.RGBA{0xb4, 0x2a, 0x3a, 0xff}
)

// legendItem is one entry of a chart's legend, drawn in HTML under the
// chart (so it never covers data).
type legendItem struct {
	Name  string
	Kind  string // "line", "dashed", "dot", "ring" or "pick"
	Color string // CSS colour
}

func seriesColor(i int) color.RGBA { return seriesColors[i%len(seriesColors)] }

func withAlpha(c color.RGBA, a uint8) color.NRGBA {
	return color.NRGBA{c.R, c.G, c.B, a}
}

const (
	chartW = 7.2 * vg.Inch
	chartH = 3.9 * vg.Inch
)

// newPlot returns a plot in the report's style: sans type, quiet axes,
// a light grid, transparent background (the card shows through).
func newPlot(xlabel, ylabel string) *plot.Plot {
	p := plot.New()
	p.BackgroundColor = color.Transparent
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Label.TextStyle.Font.Variant = "Sans"
		ax.Label.TextStyle.Font.Size = vg.Points(10)
		ax.Label.TextStyle.Color = mutedColor
		ax.Tick.Label.Font.Variant = "Sans"
		ax.Tick.Label.Font.Size = vg.Points(9)
		ax.Tick.Label.Color = mutedColor
		ax.Color = gridColor
		ax.Tick.Color = gridColor
		ax.Padding = vg.Points(4)
	}
	p.X.Tick.Marker = plainTicks{}
	p.Y.Tick.Marker = plainTicks{}
	p.X.Label.Text = xlabel
	p.Y.Label.Text = ylabel
	g := plotter.NewGrid()
	g.Vertical.Color = gridColor
	g.Horizontal.Color = gridColor
	g.Vertical.Width = vg.Points(0.6)
	g.Horizontal.Width = vg.Points(0.6)
	p.Add(g)
	return p
}

var (
	svgPrefix = regexp.MustCompile(`(?s)^.*?<svg `)
	svgXMLNS  = regexp.MustCompile(`\s+xmlns(:xlink)?="[^"]*"`)
	svgSize   = regexp.MustCompile(`width="[0-9.]+pt" height="[0-9.]+pt"`)
	svgFont   = regexp.MustCompile(`font-family:[^;"]*`)
)

// renderSVG draws p and returns inline SVG markup for an HTML page: the
// XML prolog and namespace declarations (implied in HTML) are dropped and
// the fixed size gives way to the viewBox, so the chart scales with the
// page. gonum/plot's SVG canvas escapes all text it draws.
func renderSVG(p *plot.Plot, label string) (out template.HTML, err error) {
	defer func() {
		// gonum/plot panics on some degenerate inputs; the data were
		// checked, but a report must fail with an error, not a crash.
		if r := recover(); r != nil {
			err = fmt.Errorf("draw chart %q: %v", label, r)
		}
	}()
	c := vgsvg.New(chartW, chartH)
	p.Draw(draw.New(c))
	var buf bytes.Buffer
	if _, err := c.WriteTo(&buf); err != nil {
		return "", fmt.Errorf("draw chart %q: %w", label, err)
	}
	s := buf.String()
	s = svgPrefix.ReplaceAllString(s, "<svg ")
	s = svgXMLNS.ReplaceAllString(s, "")
	s = svgSize.ReplaceAllString(s, `class="chart" role="img" aria-label="`+template.HTMLEscapeString(label)+`"`)
	// gonum/plot names the font it measured text with; the page names
	// only the generic stacks (FontSans), so every family gives way.
	s = svgFont.ReplaceAllString(s, "font-family:"+FontSans)
	return template.HTML(s), nil
}

func finite(v ...float64) bool {
	for _, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return false
		}
	}
	return true
}

// curveSeries is one series of a severity chart, sorted by severity,
// with the points that have a finite interval.
type curveSeries struct {
	name  string
	col   color.RGBA
	line  plotter.XYs
	bands []CurvePoint
}

// Limits of a severity chart's y-axis (see curveRange).
const (
	// retentionFloor is the least top of a retention chart: full
	// retention (1) and a little above always show.
	retentionFloor = 1.25
	// retentionCap is the most a retention chart's top is stretched to
	// fit its point estimates; beyond it lines are clipped and marked.
	retentionCap = 4.0
	// bandStretch is how far (as a multiple of the range the point
	// estimates need) interval bands may stretch the axis before they
	// are clipped and marked.
	bandStretch = 1.2
)

// curveRange picks the y-range of a severity chart from its point
// estimates, so that a very wide interval (a clean score near 0 lets a
// retention interval reach 100 and more) cannot squash the lines flat:
//
//   - bottom: 0 when every estimate is at least 0, else the lowest
//     estimate less a tenth of the span;
//   - base top: 1.1 × the largest estimate (or threshold); on a retention
//     chart (one with a Threshold) at least 1.25 and at most 4;
//   - bands may stretch the top (and bottom) by at most 20% of that
//     range; interval ends beyond are clipped and marked;
//   - the ends are rounded out to a quarter of the span's power of ten.
func curveRange(minY, maxY, minLo, maxHi, threshold float64) (lo, hi float64) {
	top := maxY
	if threshold != 0 {
		top = math.Max(top, threshold)
	}
	lo = math.Min(0, minY)
	if threshold != 0 {
		lo = math.Min(lo, threshold)
	}
	if lo < 0 {
		lo -= 0.1 * math.Max(top-lo, math.Abs(lo))
	}
	if top > 0 {
		top *= 1.1
	} else {
		top += 0.1 * math.Max(top-lo, 1)
	}
	if threshold > 0 {
		top = math.Min(math.Max(top, retentionFloor), math.Max(retentionCap, retentionFloor))
	}
	if !(top > lo) {
		top = lo + 1
	}
	span := top - lo
	hi = top
	if maxHi > hi {
		hi = math.Min(maxHi, top+(bandStretch-1)*span)
	}
	if minLo < lo {
		lo = math.Max(minLo, lo-(bandStretch-1)*span)
	}
	// Round the ends out to a quarter of the span's decade so the top
	// tick sits on the edge (1.84 becomes 2).
	step := math.Pow(10, math.Floor(math.Log10(hi-lo))) / 4
	if step > 0 && finite(step) {
		hi = math.Ceil(hi/step-1e-9) * step
		if lo < 0 {
			lo = math.Floor(lo/step+1e-9) * step
		}
	}
	return lo, hi
}

// curvesSVG draws a severity chart: per series a light band from Lo to
// Hi, the line through Y and the measured points on top. The y-range
// comes from curveRange; interval ends (and, rarely, points) outside it
// are clipped and marked with a small arrow at the edge, and note says
// so in a sentence for the caption ("" when nothing was clipped).
func curvesSVG(c Curves) (svg template.HTML, leg []legendItem, note string, err error) {
	var series []curveSeries
	xmin, xmax := math.Inf(1), math.Inf(-1)
	minY, maxY := math.Inf(1), math.Inf(-1)
	minLo, maxHi := math.Inf(1), math.Inf(-1)
	for i, s := range c.Series {
		pts := slices.Clone(s.Points)
		slices.SortStableFunc(pts, func(a, b CurvePoint) int { return cmp.Compare(a.X, b.X) })
		cs := curveSeries{name: s.Name, col: seriesColor(i)}
		for _, q := range pts {
			if !finite(q.X, q.Y) {
				continue
			}
			cs.line = append(cs.line, plotter.XY{X: q.X, Y: q.Y})
			xmin, xmax = math.Min(xmin, q.X), math.Max(xmax, q.X)
			minY, maxY = math.Min(minY, q.Y), math.Max(maxY, q.Y)
			// An unbounded end (+Inf when a resampled clean score was not
			// positive) is clipped like any other end beyond the axis.
			if !math.IsNaN(q.Lo) && !math.IsNaN(q.Hi) && !math.IsInf(q.Lo, 1) && !math.IsInf(q.Hi, -1) {
				cs.bands = append(cs.bands, q)
				minLo, maxHi = math.Min(minLo, q.Lo), math.Max(maxHi, q.Hi)
			}
		}
		if len(cs.line) > 0 {
			series = append(series, cs)
		}
	}
	if len(series) == 0 {
		return "", nil, "", fmt.Errorf("chart %q: no finite points", c.Title)
	}
	th := c.Threshold
	if !finite(th) {
		th = 0
	}
	ylo, yhi := curveRange(minY, maxY, minLo, maxHi, th)
	p := newPlot(c.XLabel, c.YLabel)

	// Bands first, all of them, so no band covers another series' line;
	// the more series, the lighter each band, so overlaps stay pale.
	bandAlpha := uint8(math.Round(0x30 / math.Sqrt(float64(len(series)))))
	var ups, downs []clipMark
	for _, cs := range series {
		if len(cs.bands) < 2 {
			continue
		}
		var upper, lower plotter.XYs
		for _, q := range cs.bands {
			hi, lo := q.Hi, q.Lo
			if hi > yhi {
				ups = append(ups, clipMark{q.X, cs.col, q.Hi, cs.name})
				hi = yhi
			}
			if lo < ylo {
				downs = append(downs, clipMark{q.X, cs.col, q.Lo, cs.name})
				lo = ylo
			}
			upper = append(upper, plotter.XY{X: q.X, Y: math.Max(hi, ylo)})
			lower = append(lower, plotter.XY{X: q.X, Y: math.Min(lo, yhi)})
		}
		ring := slices.Clone(upper)
		for j := len(lower) - 1; j >= 0; j-- {
			ring = append(ring, lower[j])
		}
		band, err := plotter.NewPolygon(ring)
		if err != nil {
			return "", nil, "", fmt.Errorf("chart %q: %w", c.Title, err)
		}
		band.Color = withAlpha(cs.col, bandAlpha)
		band.LineStyle.Width = 0
		p.Add(band)
	}
	var breaks plotter.XYs
	if th != 0 {
		x0, x1 := xmin, xmax
		if x0 == x1 {
			x0, x1 = x0-0.5, x1+0.5
		}
		tl, err := dashedLine(plotter.XYs{{X: x0, Y: th}, {X: x1, Y: th}}, alertColor)
		if err != nil {
			return "", nil, "", err
		}
		p.Add(tl)
	}
	for _, cs := range series {
		l, sc, err := plotter.NewLinePoints(cs.line)
		if err != nil {
			return "", nil, "", fmt.Errorf("chart %q: %w", c.Title, err)
		}
		l.Color, l.Width = cs.col, vg.Points(2)
		sc.Color, sc.Shape, sc.Radius = cs.col, draw.CircleGlyph{}, vg.Points(2.8)
		p.Add(l, sc)
		leg = append(leg, legendItem{Name: cs.name, Kind: "line", Color: cssColor(cs.col)})
		for _, q := range cs.line {
			if q.Y > yhi {
				ups = append(ups, clipMark{q.X, cs.col, q.Y, cs.name})
			} else if q.Y < ylo {
				downs = append(downs, clipMark{q.X, cs.col, q.Y, cs.name})
			}
		}
		if th != 0 {
			// The first point below the threshold: the series' breaking
			// point under the rule of breakpoint.BreakingPoint.
			for _, q := range cs.line {
				if q.Y < th {
					breaks = append(breaks, q)
					break
				}
			}
		}
	}
	// Arrows just inside the edge where something was clipped.
	inset := 0.035 * (yhi - ylo)
	for side, m := range [][]clipMark{ups, downs} {
		if len(m) == 0 {
			continue
		}
		up := side == 0
		xys := make(plotter.XYs, len(m))
		for k, cm := range m {
			xys[k] = plotter.XY{X: cm.x, Y: yhi - inset}
			if !up {
				xys[k].Y = ylo + inset
			}
		}
		sc, err := plotter.NewScatter(xys)
		if err != nil {
			return "", nil, "", err
		}
		cols := m
		sc.GlyphStyleFunc = func(k int) draw.GlyphStyle {
			g := draw.GlyphStyle{Color: cols[k].col, Radius: vg.Points(3.6), Shape: draw.PyramidGlyph{}}
			if !up {
				g.Shape = downPyramid{}
			}
			return g
		}
		p.Add(sc)
	}
	if th != 0 {
		leg = append(leg, legendItem{Name: "threshold " + num(th), Kind: "dashed", Color: cssColor(alertColor)})
		if len(breaks) > 0 {
			br, err := plotter.NewScatter(breaks)
			if err != nil {
				return "", nil, "", err
			}
			br.Color, br.Shape, br.Radius = alertColor, draw.RingGlyph{}, vg.Points(6)
			p.Add(br)
			leg = append(leg, legendItem{Name: "first below threshold", Kind: "ring", Color: cssColor(alertColor)})
		}
	}
	if len(ups)+len(downs) > 0 {
		leg = append(leg, legendItem{Name: "clipped at the edge", Kind: "clip", Color: cssColor(mutedColor)})
	}
	p.Y.Min, p.Y.Max = ylo, yhi
	p.Y.Tick.Marker = stepTicks{}
	p.X.Max += (p.X.Max - p.X.Min) * 0.03
	svg, err = renderSVG(p, c.Title)
	return svg, leg, clipNote(ups, downs, yhi, ylo), err
}

// clipMark is one value beyond the chart's y-range.
type clipMark struct {
	x   float64
	col color.RGBA
	v   float64 // the value that was clipped
	who string  // its series
}

// clipNote says in one sentence what was clipped and how far it reached.
func clipNote(ups, downs []clipMark, hi, lo float64) string {
	var parts []string
	if len(ups) > 0 {
		top := math.Inf(-1)
		for _, m := range ups {
			top = math.Max(top, m.v)
		}
		parts = append(parts, fmt.Sprintf("%d interval end%s above %s clipped (▲; the highest reaches %s)", len(ups), plural(len(ups)), num(hi), num(top)))
	}
	if len(downs) > 0 {
		bot := math.Inf(1)
		for _, m := range downs {
			bot = math.Min(bot, m.v)
		}
		parts = append(parts, fmt.Sprintf("%d below %s clipped (▼; the lowest reaches %s)", len(downs), num(lo), num(bot)))
	}
	if len(parts) == 0 {
		return ""
	}
	return "The y-axis follows the point estimates: " + strings.Join(parts, "; ") + ". The table of every cell (hover a retention) and cells.csv give the full intervals."
}

func plural(n int) string {
	if n == 1 {
		return ""
	}
	return "s"
}

// downPyramid is a filled triangle pointing down (gonum/plot's
// PyramidGlyph points up).
type downPyramid struct{}

// DrawGlyph implements draw.GlyphDrawer.
func (downPyramid) DrawGlyph(c *draw.Canvas, sty draw.GlyphStyle, pt vg.Point) {
	r := sty.Radius
	var path vg.Path
	path.Move(vg.Point{X: pt.X, Y: pt.Y - r})
	path.Line(vg.Point{X: pt.X - r*0.866, Y: pt.Y + r*0.5})
	path.Line(vg.Point{X: pt.X + r*0.866, Y: pt.Y + r*0.5})
	path.Close()
	c.Fill(path)
}

// dashedLine is a thin dashed line through xys (thresholds, budgets).
func dashedLine(xys plotter.XYs, c color.Color) (*plotter.Line, error) {
	l, err := plotter.NewLine(xys)
	if err != nil {
		return nil, err
	}
	l.Color, l.Width = c, vg.Points(1.1)
	l.Dashes = []vg.Length{vg.Points(5), vg.Points(4)}
	return l, nil
}

// errPoints adapts Pareto points to plotter's XYer and YErrorer.
type errPoints []ParetoPoint

func (e errPoints) Len() int                    { return len(e) }
func (e errPoints) XY(i int) (float64, float64) { return e[i].Cost, e[i].Score.Value }
func (e errPoints) YError(i int) (float64, float64) {
	s := e[i].Score
	lo, hi := s.Value-s.Lo, s.Hi-s.Value
	if !finite(lo, hi) || lo < 0 || hi < 0 {
		return 0, 0
	}
	return lo, hi
}

// paretoSVG draws the candidates with their intervals, the front as a
// dashed line, the pick ringed and the budget as a vertical line.
func paretoSVG(pa *Pareto, front []int, title string) (template.HTML, []legendItem, error) {
	var leg []legendItem
	p := newPlot(pa.XLabel, pa.YLabel)
	if pa.LogX {
		p.X.Scale = plot.LogScale{}
		p.X.Tick.Marker = logTicks{}
	}
	pts := errPoints(pa.Points)
	var fr plotter.XYs
	for _, i := range front {
		fr = append(fr, plotter.XY{X: pts[i].Cost, Y: pts[i].Score.Value})
	}
	if len(fr) >= 2 {
		l, err := plotter.NewLine(fr)
		if err != nil {
			return "", nil, err
		}
		l.Color, l.Width = mutedColor, vg.Points(1.1)
		l.Dashes = []vg.Length{vg.Points(4), vg.Points(3)}
		p.Add(l)
		leg = append(leg, legendItem{Name: "Pareto front", Kind: "dashed", Color: cssColor(mutedColor)})
	}
	eb, err := plotter.NewYErrorBars(pts)
	if err != nil {
		return "", nil, fmt.Errorf("chart %q: %w", title, err)
	}
	eb.Color, eb.Width, eb.CapWidth = seriesColor(0), vg.Points(1.2), vg.Points(6)
	p.Add(eb)
	sc, err := plotter.NewScatter(pts)
	if err != nil {
		return "", nil, fmt.Errorf("chart %q: %w", title, err)
	}
	sc.Color, sc.Shape, sc.Radius = seriesColor(0), draw.CircleGlyph{}, vg.Points(3.5)
	p.Add(sc)
	leg = append(leg, legendItem{Name: "candidate, 95% interval", Kind: "dot", Color: cssColor(seriesColor(0))})
	for _, q := range pts {
		if !q.Pick {
			continue
		}
		at := plotter.XYs{{X: q.Cost, Y: q.Score.Value}}
		halo, err := plotter.NewScatter(at)
		if err != nil {
			return "", nil, err
		}
		halo.Color, halo.Shape, halo.Radius = withAlpha(pickColor, 0x50), draw.CircleGlyph{}, vg.Points(10)
		pk, err := plotter.NewScatter(at)
		if err != nil {
			return "", nil, err
		}
		pk.Color, pk.Shape, pk.Radius = pickColor, draw.CircleGlyph{}, vg.Points(4.5)
		p.Add(halo, pk)
		leg = append(leg, legendItem{Name: "recommended", Kind: "pick", Color: cssColor(pickColor)})
	}
	labels := make([]string, len(pts))
	for i, q := range pts {
		labels[i] = q.Label
	}
	lb, err := plotter.NewLabels(plotter.XYLabels{XYs: xysOf(pts), Labels: labels})
	if err != nil {
		return "", nil, err
	}
	for i := range lb.TextStyle {
		lb.TextStyle[i].Font.Variant = "Sans"
		lb.TextStyle[i].Font.Size = vg.Points(10)
		lb.TextStyle[i].Color = inkColor
	}
	lb.Offset = vg.Point{X: vg.Points(7), Y: vg.Points(3)}
	p.Add(lb)
	if pa.Budget > 0 {
		ymin, ymax := math.Inf(1), math.Inf(-1)
		for _, q := range pts {
			lo, hi := q.Score.Value, q.Score.Value
			if finite(q.Score.Lo, q.Score.Hi) {
				lo, hi = math.Min(lo, q.Score.Lo), math.Max(hi, q.Score.Hi)
			}
			ymin, ymax = math.Min(ymin, lo), math.Max(ymax, hi)
		}
		bl, err := dashedLine(plotter.XYs{{X: pa.Budget, Y: ymin}, {X: pa.Budget, Y: ymax}}, alertColor)
		if err != nil {
			return "", nil, err
		}
		p.Add(bl)
		leg = append(leg, legendItem{Name: "budget " + num(pa.Budget), Kind: "dashed", Color: cssColor(alertColor)})
	}
	// Room on the right for the labels.
	p.X.Max += (p.X.Max - p.X.Min) * 0.06
	if pa.LogX {
		p.X.Max = p.X.Max * 1.15
	}
	svg, err := renderSVG(p, title)
	return svg, leg, err
}

func xysOf(pts errPoints) plotter.XYs {
	out := make(plotter.XYs, len(pts))
	for i := range pts {
		out[i].X, out[i].Y = pts.XY(i)
	}
	return out
}

// paretoFront returns the front of the chart's points.
func paretoFront(pa *Pareto) []int {
	pts := make([]choose.Point, len(pa.Points))
	for i, q := range pa.Points {
		pts[i] = choose.Point{Cost: q.Cost, Score: q.Score.Value}
	}
	return choose.ParetoFront(pts)
}

// num formats a value for people: three significant digits without an
// exponent for ordinary magnitudes, "—" for NaN, "∞" for infinities.
func num(v float64) string {
	switch {
	case math.IsNaN(v):
		return "—"
	case math.IsInf(v, 1):
		return "∞"
	case math.IsInf(v, -1):
		return "−∞"
	}
	a := math.Abs(v)
	var s string
	switch {
	case a == 0:
		return "0"
	case a >= 1e7 || a < 1e-3:
		s = fmt.Sprintf("%.2e", v)
	case a >= 100:
		s = fmt.Sprintf("%.0f", v)
	default:
		s = strconv.FormatFloat(v, 'g', 3, 64)
	}
	if strings.HasPrefix(s, "-") {
		s = "−" + s[1:]
	}
	return s
}

// plainTicks are gonum's default ticks with labels written by num, so
// that 425 reads "425", not "425.00".
type plainTicks struct{}

// Ticks implements plot.Ticker.
func (plainTicks) Ticks(min, max float64) []plot.Tick {
	ts := plot.DefaultTicks{}.Ticks(min, max)
	for i := range ts {
		if ts[i].Label != "" {
			ts[i].Label = num(ts[i].Value)
		}
	}
	return ts
}

// stepTicks label a linear axis at a round step (1, 2, 2.5 or 5 times a
// power of ten) giving at most six intervals, so a range such as 0 to 1.75
// reads 0, 0.5, 1, 1.5 rather than 0, 0.8, 1.6.
type stepTicks struct{}

// Ticks implements plot.Ticker.
func (stepTicks) Ticks(min, max float64) []plot.Tick {
	span := max - min
	if !(span > 0) || !finite(span) {
		return plainTicks{}.Ticks(min, max)
	}
	e := math.Pow(10, math.Floor(math.Log10(span)))
	step := 10 * e
	for _, m := range []float64{0.1, 0.2, 0.25, 0.5, 1, 2, 2.5, 5, 10} {
		if span/(m*e) <= 6 {
			step = m * e
			break
		}
	}
	var ts []plot.Tick
	for k := math.Ceil(min/step - 1e-9); k*step <= max+1e-9*span; k++ {
		v := k * step
		if math.Abs(v) < 1e-12*span {
			v = 0
		}
		ts = append(ts, plot.Tick{Value: v, Label: num(v)})
		if h := v + step/2; h <= max {
			ts = append(ts, plot.Tick{Value: h})
		}
	}
	return ts
}

// logTicks label a log axis at 1, 2 and 5 times the powers of ten in
// range (all powers of ten only when the range spans many decades).
type logTicks struct{}

// Ticks implements plot.Ticker.
func (logTicks) Ticks(min, max float64) []plot.Tick {
	if !(min > 0) || !(max > min) {
		return nil
	}
	lo, hi := math.Floor(math.Log10(min)), math.Ceil(math.Log10(max))
	steps := []float64{1, 2, 5}
	if hi-lo > 4 {
		steps = []float64{1}
	}
	var ts []plot.Tick
	labelled := 0
	for e := lo; e <= hi; e++ {
		for _, m := range steps {
			v := m * math.Pow(10, e)
			if v >= min*(1-1e-9) && v <= max*(1+1e-9) {
				ts = append(ts, plot.Tick{Value: v, Label: num(v)})
				labelled++
			}
		}
		for m := 2.0; m < 10; m++ {
			v := m * math.Pow(10, e)
			if v >= min && v <= max && !slices.Contains(steps, m) {
				ts = append(ts, plot.Tick{Value: v})
			}
		}
	}
	if labelled < 2 {
		// A narrow range (less than a 1-2-5 step): evenly spaced ticks
		// read better than a lone label.
		return plainTicks{}.Ticks(min, max)
	}
	return ts
}

package report

import (
	"fmt"
	"image"
	"image/color"
	"math"

	"tilebench/patch"
	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
	"tilebench/vision/stats/choose"
)

// demoData is EXAMPLE DATA for the report tests only: an invented
// patch-size and occlusion study whose scores are drawn from a made-up
// model (score falls with occlusion, faster for large patches). It is not
// a measurement of any policy.
func demoData() *Data {
	patches := []int{4, 6, 8, 12, 16}
	ratios := []float64{0, 0.1, 0.2, 0.3, 0.4, 0.5, 0.6}
	mflop := map[int]float64{4: 6.1, 6: 2.9, 8: 1.6, 12: 0.72, 16: 0.41}
	base := map[int]float64{4: 410, 6: 405, 8: 398, 12: 330, 16: 260}
	slope := map[int]float64{4: 1.2, 6: 1.25, 8: 1.35, 12: 1.7, 16: 2.1}
	bs := stats.Bootstrap{Resamples: 500}
	d := &Data{
		Title: "Example data: patch size and occlusion on an invented circuit",
		Kind:  "example study",
		Run: Run{
			Command: "tilebench sizes --game drive --family attention --patch 4,6,8,12,16 --occlude random:0:0.6:0.1 --episodes 24 --out demo-out",
			Seed:    20260101,
			Params: []KV{{"game", "drive (invented example)"}, {"policy", "attention (example)"},
				{"episodes per cell", "24"}, {"seed range", "held-out 1000–1023"}, {"workers", "2"}},
			Versions: []KV{{"tilebench", "example"}, {"go", "go1.26.8"}},
		},
		Notes: []string{"All numbers on this page are invented for the report's own tests."},
	}
	scores := func(p int, r float64, cell int) stats.Strata {
		rnd := patch.NewRand(patch.DeriveSeed(7, uint64(cell)))
		s := make(stats.Strata, 2)
		for k := range s {
			s[k] = make([]float64, 12)
			mu := base[p] * math.Max(0.02, 1-slope[p]*r*r*1.6-0.2*r)
			for i := range s[k] {
				s[k][i] = mu + 25*rnd.NormFloat64() + float64(k)*8
			}
		}
		return s
	}
	heat := Heatmap{Title: "IQM return: patch size × occlusion ratio", XLabel: "occlusion ratio", YLabel: "patch"}
	for _, r := range ratios {
		heat.X = append(heat.X, fmt.Sprintf("%.1f", r))
	}
	ret := Curves{Title: "Retention against occlusion ratio", XLabel: "occlusion ratio", YLabel: "retention", Threshold: 0.5}
	var cands []choose.Candidate
	cell := 0
	for _, p := range patches {
		heat.Y = append(heat.Y, fmt.Sprintf("%d px", p))
		row := make([]float64, len(ratios))
		clean := scores(p, 0, cell)
		cands = append(cands, choose.Candidate{Name: fmt.Sprintf("patch %d", p), Cost: mflop[p], Scores: clean})
		se := Series{Name: fmt.Sprintf("patch %d", p)}
		var levels []breakpoint.Level
		for j, r := range ratios {
			sc := clean
			if j > 0 {
				sc = scores(p, r, cell)
			}
			bs.Seed = uint64(cell)
			sum, _ := bs.Summarize(sc)
			row[j] = sum.IQM.Value
			c := Cell{ID: fmt.Sprintf("p%d/occlude=random:%.1f", p, r), Patch: p, Axis: "occlude", Kind: "random", Severity: r,
				Params:   []KV{{"patch", fmt.Sprint(p)}, {"occlude", fmt.Sprintf("random:%.1f", r)}},
				Episodes: 24, Summary: sum}
			if j == 0 {
				c.Axis, c.Kind = "clean", ""
			} else {
				e, err := bs.Retention(sc, clean, stats.StatIQM)
				if err == nil {
					c.Retention = &e
					levels = append(levels, breakpoint.Level{Severity: r, Retention: e})
					se.Points = append(se.Points, CurvePoint{X: r, Y: e.Value, Lo: e.Lo, Hi: e.Hi})
				}
			}
			if p == 16 && j == 6 {
				c.Failures, c.Note = 2, "2 episodes hit the step limit"
			}
			d.Cells = append(d.Cells, c)
			cell++
		}
		if p == 12 {
			row[3] = math.NaN() // one cell not measured, to show the hatching
		}
		heat.Z = append(heat.Z, row)
		ret.Series = append(ret.Series, se)
		if p == 8 || p == 16 {
			br, _ := breakpoint.BreakingPoint(levels, 0)
			d.Breaks = append(d.Breaks, Break{Axis: fmt.Sprintf("occlusion, patch %d", p), Break: br})
		}
		if p == 4 { // a strict-looking threshold nothing falls below, to show "not reached"
			br, _ := breakpoint.BreakingPoint(levels, 0.1)
			d.Breaks = append(d.Breaks, Break{Axis: "occlusion, patch 4, threshold 0.1", Break: br})
		}
	}
	ch, _ := choose.Recommender{Bootstrap: stats.Bootstrap{Resamples: 500}, Budget: 3}.Recommend(cands)
	pa := &Pareto{XLabel: "MFLOP per step", YLabel: "IQM return (clean)", LogX: true, Budget: 3}
	for i, c := range cands {
		d.Costs = append(d.Costs, Cost{Name: c.Name, Patch: patches[i], Tokens: (64 / patches[i]) * (64 / patches[i]),
			MFLOP: c.Cost, Params: 4000 + 90*patches[i]*patches[i], LatencyUS: c.Cost * 31, Score: ch.Score[i],
			Pick: i == ch.Pick, OverBudget: c.Cost > 3})
		pa.Points = append(pa.Points, ParetoPoint{Label: fmt.Sprint(patches[i]), Cost: c.Cost, Score: ch.Score[i], Pick: i == ch.Pick})
	}
	d.Pareto = pa
	d.Recommendation = &Recommendation{Choice: cands[ch.Pick].Name, Rule: choose.Rule,
		Detail: fmt.Sprintf("Not significantly below the best (%s) at %.0f%% of its compute; budget 3 MFLOP per step.",
			cands[ch.Best].Name, 100*cands[ch.Pick].Cost/cands[ch.Best].Cost)}
	d.Findings = []KV{{"Clean IQM, recommended", ch.Score[ch.Pick].String()}}
	d.Heatmaps = []Heatmap{heat}
	d.Curves = []Curves{ret}
	for _, p := range []int{8, 16} {
		st := Strip{Title: fmt.Sprintf("Patch %d under random occlusion", p), Caption: "Invented frames: a grey ribbon on green, occluded patches blacked out."}
		for _, r := range []float64{0, 0.2, 0.4, 0.6} {
			st.Frames = append(st.Frames, Frame{Label: fmt.Sprintf("ratio %.1f", r), Image: demoFrame(p, r)})
		}
		d.Strips = append(d.Strips, st)
	}
	return d
}

// demoFrame draws an invented 64×64 scene (a curved grey ribbon on a
// green field) with a share r of its p×p patches blacked out.
func demoFrame(p int, r float64) *image.RGBA {
	img := image.NewRGBA(image.Rect(0, 0, 64, 64))
	for y := 0; y < 64; y++ {
		cx := 32 + 14*math.Sin(float64(y)/14)
		for x := 0; x < 64; x++ {
			c := color.RGBA{0x4f, 0x8a, 0x3c, 0xff}
			if math.Abs(float64(x)-cx) < 9 {
				c = color.RGBA{0x8c, 0x8f, 0x94, 0xff}
				if math.Abs(float64(x)-cx) < 1 && y%8 < 4 {
					c = color.RGBA{0xf2, 0xe6, 0xb0, 0xff}
				}
			}
			img.SetRGBA(x, y, c)
		}
	}
	rnd := patch.NewRand(uint64(p)*1000 + uint64(r*100))
	for py := 0; py < 64/p; py++ {
		for px := 0; px < 64/p; px++ {
			if rnd.Float64() < r {
				for y := py * p; y < (py+1)*p; y++ {
					for x := px * p; x < (px+1)*p; x++ {
						img.SetRGBA(x, y, color.RGBA{0x10, 0x12, 0x16, 0xff})
					}
				}
			}
		}
	}
	return img
}

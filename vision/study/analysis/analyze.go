package analysis

import (
	"encoding/json"
	"errors"
	"fmt"
	"image"
	"image/draw"
	"image/png"
	"io"
	"math"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"strconv"
	"strings"

	"tilebench/internal/atomicfile"
	"tilebench/internal/seeds"
	"tilebench/patch"
	"tilebench/vision/report"
	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
	"tilebench/vision/stats/choose"
	"tilebench/vision/study"
)

// CostsFile holds the cost table of a sizes study.
const CostsFile = "costs.json"

// Cost is the compute cost of the policy at one patch size, as the cost
// model of vision/nets counts it and as measured on the machine that ran
// the study.
type Cost struct {
	Patch     int     `json:"patch"`
	Tokens    int     `json:"tokens"`
	MFLOP     float64 `json:"mflop"`
	Params    int     `json:"params"`
	LatencyUS float64 `json:"latency_us"`
}

// CostTable is the content of costs.json.
type CostTable struct {
	Format int    `json:"format"`
	Costs  []Cost `json:"costs"`
}

// WriteCosts records the cost table of a sizes study in dir.
func WriteCosts(dir string, costs []Cost) error {
	b, err := json.MarshalIndent(CostTable{Format: 1, Costs: costs}, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, CostsFile), append(b, '\n'))
}

func readCosts(dir string) ([]Cost, error) {
	data, err := os.ReadFile(filepath.Join(dir, CostsFile))
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var t CostTable
	if err := json.Unmarshal(data, &t); err != nil || t.Format != 1 {
		return nil, fmt.Errorf("read %s: not a format 1 cost table", CostsFile)
	}
	return t.Costs, nil
}

// CellStats are the statistics of one cell.
type CellStats struct {
	Cell  study.Cell
	Index int
	// Returns are the scores of the cell's finished episodes in episode
	// order, error episodes scored at the study's worst return (see
	// WorstReturn); ByEpisode holds them by episode index, NaN for an
	// episode not recorded.
	Returns   []float64
	ByEpisode []float64
	// Episodes counts recorded episodes, Failures (= Errors) those that
	// could not be played (a policy crash, a bad action).
	Episodes, Failures int
	// FailNote is the most common error.
	FailNote string
	// GameFailed is the share of played episodes the game's failure rule
	// ended (off the road, too many misses), TimeUp the share that hit
	// the step limit, with Wilson intervals (Wilson 1927).
	GameFailed, TimeUp stats.Rate
	// CVaR is the mean of the worst 10% of Returns (Chan et al. 2020).
	CVaR    float64
	Summary *stats.Summary
	// Retention is the normalised retention against the cell's clean
	// reference, (IQM − floor) / (IQM clean − floor), paired over seeds;
	// nil when undefined (Note says why).
	Retention *stats.Estimate
	// Expert is the share of expert, (IQM − floor) / (IQM expert −
	// floor), paired over seeds; nil when there is no expert baseline.
	Expert *stats.Estimate
	// VsClean compares the cell with its clean reference on shared seeds.
	VsClean *stats.PairedComparison
	// Note explains a missing statistic; Warn flags an unstable one.
	Note, Warn string
}

// Analysis is what the report shows, computed from recorded results only.
type Analysis struct {
	Info  *study.Info
	Plan  *study.Plan
	Cells []CellStats
	// Curves group cells along one stress axis with all else fixed.
	Curves []AxisCurve
	// Costs and Choice are set for sizes studies with a cost table.
	Costs  []Cost
	Choice *choose.Choice
	// Cands names the candidates of Choice (one per patch size).
	Cands []int
	// Conds are the per-condition non-inferiority tests of a sizes study.
	Conds []CondTest
	// RecNote says why a sizes study has no recommendation.
	RecNote string
	// Scale is how the recommendation's scores were normalised.
	Scale string
	// Timing is the median steps per second over the recorded episodes.
	StepsPerSecond float64
	// Floors is the baseline table (nil when none was recorded); Floor
	// names the floor policy.
	Floors *FloorTable
	Floor  string
	// WorstReturn is the score an error episode counts as: the lowest
	// return of any played episode of the study or its baselines.
	WorstReturn float64
	// Errors counts error episodes over the study.
	Errors int
	// Diffs compare the policies of a study comparing several, pair by
	// pair and condition by condition; Verdicts say which is more robust
	// on each stress axis; CompareScale describes the common scale of
	// the normalised scores (or why there is none).
	Diffs        []PolicyDiff
	Verdicts     []Robustness
	CompareScale string
}

// CondTest is the non-inferiority test of the patch sizes in one
// condition of a sizes study.
type CondTest struct {
	// Label names the condition ("clean", "occlude random:0.25", ...).
	Label string
	// Best indexes Analysis.Cands; Score are the candidates' normalised
	// IQMs in this condition; Versus their comparisons with Best.
	Best   int
	Score  []stats.Estimate
	Versus []choose.Comparison
	// Note says why the condition could not be tested.
	Note string
}

// AxisCurve is one stress axis in one context.
type AxisCurve struct {
	// Axis is e.g. "random occlusion ratio"; Context what else is applied.
	Axis, Kind, Context string
	Patch               int
	// Policy is the label of the policy the curve measures ("" in a
	// study of one unlabelled policy).
	Policy string
	// Cells are indices into Analysis.Cells, sorted by severity.
	Cells      []int
	Severities []float64
	Break      *breakpoint.Break
	// Pure is true when nothing else is applied (the context is the
	// clean cell on the study's variation).
	Pure bool
	// Note says why there is no breaking point.
	Note string
}

func (a *Analysis) boot(c int, stream string) stats.Bootstrap {
	d := a.Plan.Def
	return stats.Bootstrap{Resamples: d.Stats.Resamples, Level: d.Stats.Confidence,
		Seed: seeds.DeriveSeed(d.Seed, seeds.StreamKey(stream), seeds.StreamKey(a.Plan.Cells[c].ID()))}
}

// Analyze reads a study folder and computes every statistic. Its result
// depends only on study.json, results.jsonl, floors.json and costs.json.
func Analyze(dir string) (*Analysis, error) {
	si, err := study.ReadInfo(dir)
	if err != nil {
		return nil, err
	}
	p, err := si.Plan()
	if err != nil {
		return nil, err
	}
	recs, _, err := study.ReadResults(dir)
	if err != nil {
		return nil, err
	}
	return FromRecords(dir, si, p, recs)
}

// FromRecords is Analyze on the records recs already read from dir (with
// its study.json si and plan p), so that a run reads its results once.
func FromRecords(dir string, si *study.Info, p *study.Plan, recs []study.Record) (*Analysis, error) {
	a := &Analysis{Info: si, Plan: p, Floor: p.Def.Floor}
	if a.Floor == "" {
		a.Floor = DefaultFloor
	}
	ft, err := ReadFloors(dir)
	if err != nil {
		return nil, err
	}
	if ft != nil && ft.Study == p.Fingerprint {
		a.Floors = ft
	}
	a.Cells = make([]CellStats, len(p.Cells))
	fails := make([]map[string]int, len(p.Cells))
	ne := p.Def.Episodes
	for i, c := range p.Cells {
		a.Cells[i] = CellStats{Cell: c, Index: i, ByEpisode: make([]float64, ne)}
		for e := range a.Cells[i].ByEpisode {
			a.Cells[i].ByEpisode[e] = nan
		}
	}
	latest := study.Latest(recs)
	a.WorstReturn = math.Inf(1)
	for _, r := range latest {
		if r.Study != p.Fingerprint || r.Cell < 0 || r.Cell >= len(p.Cells) || r.Episode < 0 || r.Episode >= ne {
			return nil, fmt.Errorf("%s: a record of another study (%s)", filepath.Join(dir, study.ResultsFile), r.Study)
		}
		if !r.Failed() {
			a.WorstReturn = math.Min(a.WorstReturn, r.Return)
		}
	}
	if a.Floors != nil {
		for _, bs := range [][]Baseline{a.Floors.Floors, a.Floors.Expert} {
			for _, b := range bs {
				for e, v := range b.Returns {
					if e >= len(b.Errors) || b.Errors[e] == "" {
						a.WorstReturn = math.Min(a.WorstReturn, v)
					}
				}
			}
		}
	}
	if math.IsInf(a.WorstReturn, 1) {
		a.WorstReturn = nan
	}
	failed, timeUp, played := make([]int, len(p.Cells)), make([]int, len(p.Cells)), make([]int, len(p.Cells))
	for _, r := range latest {
		cs := &a.Cells[r.Cell]
		cs.Episodes++
		if r.Failed() {
			cs.Failures++
			a.Errors++
			if fails[r.Cell] == nil {
				fails[r.Cell] = map[string]int{}
			}
			fails[r.Cell][r.Failure]++
			// Scored at the worst return, not dropped: errors that rise
			// with stress must lower the score, not leave the survivors.
			if !math.IsNaN(a.WorstReturn) {
				cs.ByEpisode[r.Episode] = a.WorstReturn
			}
			continue
		}
		played[r.Cell]++
		switch r.End {
		case "failed":
			failed[r.Cell]++
		case "time-up":
			timeUp[r.Cell]++
		}
		cs.ByEpisode[r.Episode] = r.Return
	}
	lv := p.Def.Stats.Confidence
	for i := range a.Cells {
		cs := &a.Cells[i]
		for _, v := range cs.ByEpisode {
			if !math.IsNaN(v) {
				cs.Returns = append(cs.Returns, v)
			}
		}
		cs.GameFailed = stats.NewRate(failed[i], played[i], lv)
		cs.TimeUp = stats.NewRate(timeUp[i], played[i], lv)
		best := 0
		for why, n := range fails[i] {
			if n > best || n == best && why < cs.FailNote {
				best, cs.FailNote = n, why
			}
		}
		cs.CVaR = nan
		if len(cs.Returns) == 0 {
			cs.Note = "no finished episodes"
			continue
		}
		cs.CVaR, _ = stats.CVaR(cs.Returns, stats.DefaultCVaRLevel)
		s, err := a.boot(i, "summary").Summarize(stats.Strata{cs.Returns})
		if err != nil {
			cs.Note = err.Error()
			continue
		}
		cs.Summary = &s
	}
	a.normalise()
	a.curves()
	a.comparePolicies()
	a.StepsPerSecond = medianSPS(study.ReadTimings(dir))
	if p.Def.Kind == "sizes" {
		costs, err := readCosts(dir)
		if err != nil {
			return nil, err
		}
		a.Costs = costs
		if p.Def.Compares() {
			a.RecNote = "no recommendation: the study compares several policies; a patch size is recommended for one policy at a time (run sizes with that policy alone)"
		} else if err := a.recommend(); err != nil {
			return nil, err
		}
	}
	return a, nil
}

func medianSPS(ts []study.Timing) float64 {
	var v []float64
	for _, t := range ts {
		if t.StepsPerSecond > 0 {
			v = append(v, t.StepsPerSecond)
		}
	}
	if len(v) == 0 {
		return 0
	}
	return stats.Median(v)
}

// axis describes one stress axis: how to read a cell's severity on it and
// how to put the cell back to the axis's identity.
type axis struct {
	name string
	sev  func(c study.Cell) (kind string, s float64, identity bool, ok bool)
	zero func(c study.Cell) study.Cell
}

func ratioOf(s string) (string, float64, bool) {
	k, v, ok := strings.Cut(s, ":")
	if !ok {
		return k, 0, false
	}
	f, err := strconv.ParseFloat(v, 64)
	return k, f, err == nil
}

var axes = []axis{
	{name: "occlusion ratio", sev: func(c study.Cell) (string, float64, bool, bool) {
		if c.Occlude == "none" {
			return "", 0, true, true
		}
		k, f, ok := ratioOf(c.Occlude)
		return k, f, false, ok
	}, zero: func(c study.Cell) study.Cell { c.Occlude = "none"; return c }},
	{name: "scramble", sev: func(c study.Cell) (string, float64, bool, bool) {
		if c.Scramble == "none" {
			return "", 0, true, true
		}
		if c.Scramble == "full" {
			return "partial", 1, false, true
		}
		k, f, ok := ratioOf(c.Scramble)
		return k, f, false, ok
	}, zero: func(c study.Cell) study.Cell { c.Scramble = "none"; c.Every = 0; return c }},
	{name: "noise tokens", sev: func(c study.Cell) (string, float64, bool, bool) {
		return "count", float64(c.NoiseTokens), c.NoiseTokens == 0, true
	}, zero: func(c study.Cell) study.Cell { c.NoiseTokens = 0; return c }},
	{name: "pixel noise σ", sev: func(c study.Cell) (string, float64, bool, bool) {
		return "sigma", c.PixelNoise, c.PixelNoise == 0, true
	}, zero: func(c study.Cell) study.Cell { c.PixelNoise = 0; return c }},
	{name: "brightness shift", sev: func(c study.Cell) (string, float64, bool, bool) {
		return "abs", math.Abs(c.Brightness), c.Brightness == 0, true
	}, zero: func(c study.Cell) study.Cell { c.Brightness = 0; return c }},
	{name: "contrast change", sev: func(c study.Cell) (string, float64, bool, bool) {
		return "abs", math.Abs(c.Contrast - 1), c.Contrast == 1, true
	}, zero: func(c study.Cell) study.Cell { c.Contrast = 1; return c }},
	{name: "corruption", sev: corruptSeverity, zero: func(c study.Cell) study.Cell { c.Corrupt = ""; return c }},
}

// corruptSeverity places a cell with one frame corruption on its curve:
// the kind with its severity level (KIND:sN), or the kind with a
// parameter that grows with the harm: σ, length, rate, amplitude, pixels
// or degrees as written, 1/F for resolution, 100−Q for JPEG, |ln G| for
// gamma and |ln S| for scale. Lists of several corruptions are on no
// curve.
func corruptSeverity(c study.Cell) (string, float64, bool, bool) {
	if !c.Corrupted() {
		return "", 0, true, true
	}
	cs, err := patch.ParseCorrupt(c.Corrupt)
	if err != nil || len(cs) != 1 {
		return "", 0, false, false
	}
	k := cs[0]
	if k.Level > 0 {
		return k.Kind + " severity", float64(k.Level), false, true
	}
	switch k.Kind {
	case "resolution":
		return "resolution 1/F", 1 / k.A, false, true
	case "jpeg":
		return "jpeg 100−Q", 100 - k.A, false, true
	case "gamma":
		return "gamma |ln G|", math.Abs(math.Log(k.A)), false, true
	case "scale":
		return "scale |ln S|", math.Abs(math.Log(k.A)), false, true
	case "shift":
		return "shift px", math.Max(math.Abs(k.A), math.Abs(k.B)), false, true
	case "rotate":
		return "rotate degrees", math.Abs(k.A), false, true
	}
	return k.Kind + " " + map[string]string{"blur": "σ", "sharpen": "σ", "motionblur": "length", "saltpepper": "rate",
		"dead": "rate", "shake": "amplitude"}[k.Kind], k.A, false, true
}

func axisName(a axis, kind string) string {
	switch {
	case a.name == "occlusion ratio":
		return kind + " occlusion ratio"
	case a.name == "scramble" && kind == "partial":
		return "scrambled fraction"
	case a.name == "scramble" && kind == "local":
		return "local scramble radius"
	case a.name == "corruption":
		return "corrupt " + kind
	}
	return a.name
}

// curves groups the cells along each axis with everything else fixed.
func (a *Analysis) curves() {
	byKey := map[string]int{}
	for i, c := range a.Plan.Cells {
		byKey[c.ID()] = i
	}
	thr := a.Plan.Def.Stats.Threshold
	for _, ax := range axes {
		type group struct {
			ctx   int
			kind  string
			cells []int
		}
		var order []string
		groups := map[string]*group{}
		for i, c := range a.Plan.Cells {
			kind, _, ident, ok := ax.sev(c)
			if ident || !ok {
				continue
			}
			ctxCell := ax.zero(c)
			ctx, ok := byKey[ctxCell.ID()]
			if !ok {
				ctx = -1
			}
			gk := ctxCell.ID() + "|" + kind
			g := groups[gk]
			if g == nil {
				g = &group{ctx: ctx, kind: kind}
				groups[gk] = g
				order = append(order, gk)
				if ctx >= 0 {
					g.cells = append(g.cells, ctx)
				}
			}
			g.cells = append(g.cells, i)
		}
		for _, gk := range order {
			g := groups[gk]
			sort.SliceStable(g.cells, func(x, y int) bool {
				_, sx, _, _ := ax.sev(a.Plan.Cells[g.cells[x]])
				_, sy, _, _ := ax.sev(a.Plan.Cells[g.cells[y]])
				return sx < sy
			})
			ctxCell := ax.zero(a.Plan.Cells[g.cells[len(g.cells)-1]])
			ctxLabel := fmt.Sprintf("patch %d", ctxCell.Patch)
			if ctxCell.Policy != "" {
				ctxLabel = "policy " + ctxCell.Policy + ", " + ctxLabel
			}
			if l := ctxCell.Label(); l != "clean" {
				ctxLabel += ", " + l
			}
			if ctxCell.Variation != a.Plan.Def.Variation {
				ctxLabel += ", variation " + variationName(ctxCell.Variation)
			}
			cv := AxisCurve{Axis: axisName(ax, g.kind), Kind: g.kind, Context: ctxLabel, Patch: ctxCell.Patch, Policy: ctxCell.Policy, Cells: g.cells,
				Pure: ctxCell.Clean() && ctxCell.Variation == a.Plan.Def.Variation}
			var levels []breakpoint.Level
			stressed := 0
			for _, ci := range g.cells {
				_, s, _, _ := ax.sev(a.Plan.Cells[ci])
				cv.Severities = append(cv.Severities, s)
				if r := a.Cells[ci].Retention; r != nil {
					levels = append(levels, breakpoint.Level{Severity: s, Retention: *r})
					if ci != g.ctx {
						stressed++
					}
				}
			}
			if stressed > 0 {
				if br, err := breakpoint.BreakingPoint(levels, thr); err == nil {
					cv.Break = &br
				}
			} else {
				cv.Note = "no breaking point: retention is undefined at every severity"
				for _, ci := range g.cells {
					if n := a.Cells[ci].Note; n != "" {
						cv.Note += " (" + n + ")"
						break
					}
				}
			}
			a.Curves = append(a.Curves, cv)
		}
	}
}

func variationName(v string) string {
	if v == "" {
		return "default"
	}
	return v
}

// WriteReport analyses the study in dir and writes report.html,
// summary.md and cells.csv there.
func WriteReport(dir string) error {
	a, err := Analyze(dir)
	if err != nil {
		return err
	}
	return report.Write(dir, a.ReportData(dir))
}

// ReportData turns the analysis into the report's data model. dir is
// where the strips were recorded.
func (a *Analysis) ReportData(dir string) *report.Data {
	d := a.Plan.Def
	rd := &report.Data{Title: fmt.Sprintf("%s: %s / %s", d.Name, d.Game, policiesLabel(d)), Kind: d.Kind + " study"}
	if d.Kind == "sizes" {
		rd.Kind = "patch-size study"
	}
	rd.Run = report.Run{Command: a.Info.Command, Seed: d.Seed, Versions: []report.KV{{Key: "go", Value: runtime.Version()}}}
	if rd.Run.Command == "" {
		rd.Run.Command = "tilebench report " + dir
	}
	rd.Run.Params = []report.KV{
		{Key: "study", Value: a.Plan.Fingerprint},
		{Key: "game", Value: d.Game},
		{Key: "variation", Value: variationName(d.Variation)},
		{Key: policyKey(d), Value: policiesLabel(d)},
		{Key: "cells", Value: strconv.Itoa(len(a.Plan.Cells))},
		{Key: "episodes per cell", Value: strconv.Itoa(d.Episodes)},
		{Key: "game seeds", Value: d.Seeds},
		{Key: "bootstrap", Value: fmt.Sprintf("%d resamples, %.0f%% percentile intervals (BCa below %d episodes); paired over shared seeds wherever two cells are compared", d.Stats.Resamples, 100*d.Stats.Confidence, stats.MinPercentileN)},
		{Key: "floor", Value: a.FloorLabel()},
		{Key: "breaking threshold", Value: fmtG(d.Stats.Threshold) + " normalised retention (whole interval below)"},
		{Key: "error episodes", Value: "scored at the worst return " + fmtG(a.WorstReturn) + " (the lowest of any played episode of the study or its baselines)"},
	}
	if d.Kind == "sizes" {
		m := d.Stats.Margin
		if m == 0 {
			m = choose.DefaultMargin
		}
		rd.Run.Params = append(rd.Run.Params, report.KV{Key: "non-inferiority margin", Value: fmtG(m) + " on the normalised scale, one-sided α " + fmtG(choose.DefaultAlpha) + ", Holm over the comparisons"})
	}
	if a.StepsPerSecond > 0 {
		rd.Run.Params = append(rd.Run.Params, report.KV{Key: "speed", Value: fmt.Sprintf("%.0f steps/s per worker (median, timing.jsonl)", a.StepsPerSecond)})
	}
	for _, l := range d.PolicyList() {
		who := "The policy is"
		if l.Label != "" {
			who = "Policy " + l.Label + " is"
		}
		switch l.Source {
		case "expert":
			rd.Notes = append(rd.Notes, who+" the scripted expert, which reads the game state, not pixels: transforms of the input do not reach it, so its cells show the game's spread, not robustness.")
		case "fresh":
			rd.Notes = append(rd.Notes, who+" an untrained network (fresh weights): its scores show the pipeline at work, not a trained policy's robustness.")
		}
	}
	for _, cs := range a.Cells {
		rd.Run.Episodes += cs.Episodes - cs.Failures
		rd.Run.Failures += cs.Failures
	}
	warned := false
	for _, cs := range a.Cells {
		if cs.Warn != "" && !warned {
			warned = true
			rd.Notes = append(rd.Notes, "Some retentions are ratios over a clean score whose interval comes near the floor: read their intervals with care (see the warnings in the table of every cell).")
		}
	}
	for i := range a.Plan.Cells {
		if ref := a.Plan.Reference(i); ref == i && a.Cells[i].Summary != nil {
			rd.Findings = append(rd.Findings, report.KV{Key: withPolicy(a.Plan.Cells[i], fmt.Sprintf("clean IQM, patch %d", a.Plan.Cells[i].Patch)), Value: a.Cells[i].Summary.IQM.String()})
		}
	}
	for i, c := range a.Plan.Cells {
		// Held-out variations, otherwise clean: how much of the clean
		// score carries over.
		if r := a.Cells[i].Retention; r != nil && c.Clean() && c.Variation != d.Variation {
			rd.Findings = append(rd.Findings, report.KV{Key: withPolicy(c, fmt.Sprintf("retention on variation %s, patch %d", variationName(c.Variation), c.Patch)), Value: r.String()})
		}
	}
	// The headline: every axis on its own, and every combination that
	// breaks; the rest is in the charts and the table.
	for _, cv := range a.Curves {
		if cv.Break != nil && (cv.Pure || cv.Break.Reached) {
			rd.Breaks = append(rd.Breaks, report.Break{Axis: cv.Axis + " (" + cv.Context + ")", Break: *cv.Break})
		}
		if cv.Break == nil && cv.Pure {
			// An undefined breaking point is a row that says why.
			rd.Breaks = append(rd.Breaks, report.Break{Axis: cv.Axis + " (" + cv.Context + ")", Note: cv.Note,
				Break: breakpoint.Break{Severity: math.NaN(), FirstDip: math.NaN(), Threshold: d.Stats.Threshold}})
		}
	}
	a.costSection(rd)
	a.comparisonSection(rd)
	a.soundTables(rd)
	a.curveSections(rd)
	a.stripSections(rd, dir)
	for i, cs := range a.Cells {
		rc := report.Cell{ID: cellID(i, cs.Cell, d.Variation), Patch: cs.Cell.Patch, Episodes: cs.Episodes, Failures: cs.Failures,
			Retention: cs.Retention, Note: cs.Note, GameFailed: cs.GameFailed, TimeUp: cs.TimeUp, Expert: cs.Expert, Warn: cs.Warn}
		if !math.IsNaN(cs.CVaR) {
			v := cs.CVaR
			rc.CVaR = &v
		}
		rc.Axis, rc.Kind, rc.Severity = primaryAxis(cs.Cell)
		rc.Params = cellParams(cs.Cell)
		if cs.Summary != nil {
			rc.Summary = *cs.Summary
		}
		if cs.FailNote != "" {
			rc.Note = strings.TrimSpace(rc.Note + " errors: " + cs.FailNote)
		}
		if i == a.Plan.Reference(i) {
			rc.Retention = nil
		}
		rd.Cells = append(rd.Cells, rc)
	}
	return rd
}

// cellID is the cell's short stable name in the report: its index and
// what it does, e.g. "3 p8/occlude=random:0.3/scramble=full".
func cellID(i int, c study.Cell, base string) string {
	id := fmt.Sprintf("%d p%d", i, c.Patch)
	if c.Policy != "" {
		id = fmt.Sprintf("%d %s/p%d", i, c.Policy, c.Patch)
	}
	if c.Variation != base {
		id += "/variation=" + variationName(c.Variation)
	}
	if c.Occlude != "none" {
		id += "/occlude=" + c.Occlude
		if c.Fill != "black" {
			id += "/fill=" + c.Fill
		}
	}
	if c.Scramble != "none" {
		id += "/scramble=" + c.Scramble
		if c.Every > 0 {
			id += "/every=" + strconv.Itoa(c.Every)
		}
	}
	if c.NoiseTokens > 0 {
		id += "/noise_tokens=" + strconv.Itoa(c.NoiseTokens)
	}
	if c.Brightness != 0 {
		id += "/brightness=" + fnum(c.Brightness)
	}
	if c.Contrast != 1 {
		id += "/contrast=" + fnum(c.Contrast)
	}
	if c.PixelNoise != 0 {
		id += "/pixel_noise=" + fnum(c.PixelNoise)
	}
	if c.Corrupted() {
		id += "/corrupt=" + c.Corrupt
	}
	if c.Clean() && c.Variation == base {
		id += "/clean"
	}
	return id
}

func fmtG(v float64) string { return strconv.FormatFloat(v, 'g', 4, 64) }

func policyLabel(p study.PolicyDef) string {
	switch p.Source {
	case "expert":
		return "scripted expert"
	case "fresh":
		return "untrained " + p.Family
	}
	return p.Source
}

// policiesLabel names the study's policies: the one policy, or the
// labels side by side.
func policiesLabel(d study.Definition) string {
	if len(d.Policies) == 0 {
		return policyLabel(d.Policy)
	}
	parts := make([]string, len(d.Policies))
	for i, l := range d.Policies {
		pd := d.Policy
		pd.Source = l.Source
		name := policyLabel(pd)
		if name == l.Source && !strings.HasPrefix(name, "exec:") && !strings.HasPrefix(name, "tcp://") {
			// A weights file: its name, not its folders, keeps the title
			// short (the full source is in study.json and Reproduce).
			name = filepath.Base(name)
		}
		parts[i] = l.Label + " (" + name + ")"
	}
	return strings.Join(parts, " vs ")
}

func policyKey(d study.Definition) string {
	if len(d.Policies) > 1 {
		return "policies"
	}
	return "policy"
}

// withPolicy prefixes a finding's name with the cell's policy label.
func withPolicy(c study.Cell, s string) string {
	if c.Policy == "" {
		return s
	}
	return c.Policy + ": " + s
}

func primaryAxis(c study.Cell) (string, string, float64) {
	var found []string
	var kind string
	var sev float64
	for _, ax := range axes {
		k, s, ident, ok := ax.sev(c)
		if !ident && ok {
			if len(found) == 0 {
				kind, sev = k, s
			}
			found = append(found, axisName(ax, k))
		}
	}
	switch len(found) {
	case 0:
		return "clean", "", 0
	case 1:
		return found[0], kind, sev
	}
	return "mixed: " + strings.Join(found, " + "), kind, sev
}

func cellParams(c study.Cell) []report.KV {
	var kv []report.KV
	if c.Policy != "" {
		kv = append(kv, report.KV{Key: "policy", Value: c.Policy})
	}
	kv = append(kv, []report.KV{
		{Key: "patch", Value: strconv.Itoa(c.Patch)},
		{Key: "variation", Value: variationName(c.Variation)},
		{Key: "occlude", Value: c.Occlude},
		{Key: "fill", Value: c.Fill},
		{Key: "scramble", Value: c.Scramble},
		{Key: "every", Value: strconv.Itoa(c.Every)},
		{Key: "noise_tokens", Value: strconv.Itoa(c.NoiseTokens)},
		{Key: "brightness", Value: fnum(c.Brightness)},
		{Key: "contrast", Value: fnum(c.Contrast)},
		{Key: "pixel_noise", Value: fnum(c.PixelNoise)},
	}...)
	if c.Corrupted() {
		kv = append(kv, report.KV{Key: "corrupt", Value: c.Corrupt})
	}
	return kv
}

func (a *Analysis) costSection(rd *report.Data) {
	if len(a.Costs) == 0 {
		return
	}
	d := a.Plan.Def
	unit := "MFLOP per step"
	budget := d.Budget.MFLOP
	if d.Budget.Microseconds > 0 {
		unit, budget = "µs per step (measured)", d.Budget.Microseconds
	}
	pick, best := -1, -1
	if a.Choice != nil {
		pick, best = a.Choice.Pick, a.Choice.Best
	}
	pos := map[int]int{}
	for i, p := range a.Cands {
		pos[p] = i
	}
	par := &report.Pareto{XLabel: unit, YLabel: "normalised IQM (clean + stress set, pooled)", LogX: true, Budget: budget}
	for _, c := range a.Costs {
		rc := report.Cost{Name: fmt.Sprintf("patch %d", c.Patch), Patch: c.Patch, Tokens: c.Tokens, MFLOP: c.MFLOP,
			Params: c.Params, LatencyUS: c.LatencyUS, Score: stats.Estimate{Value: math.NaN()}}
		x := c.MFLOP
		if d.Budget.Microseconds > 0 {
			x = c.LatencyUS
		}
		if i, ok := pos[c.Patch]; ok && a.Choice != nil {
			rc.Score = a.Choice.Score[i]
			rc.Pick = i == pick
			rc.OverBudget = !a.Choice.Affordable[i]
			if x > 0 {
				par.Points = append(par.Points, report.ParetoPoint{Label: strconv.Itoa(c.Patch), Cost: x, Score: rc.Score, Pick: rc.Pick})
			}
		}
		rd.Costs = append(rd.Costs, rc)
	}
	if len(par.Points) > 0 {
		rd.Pareto = par
	}
	if a.Choice == nil && a.RecNote != "" {
		rd.Recommendation = &report.Recommendation{Rule: choose.Rule, Detail: a.RecNote + "."}
	}
	if a.Choice != nil {
		rec := &report.Recommendation{Rule: choose.Rule}
		ch := a.Choice
		switch {
		case pick < 0:
			rec.Detail = "No patch size fits the budget."
		default:
			rec.Choice = fmt.Sprintf("patch %d", a.Cands[pick])
			ncond := 0
			if best >= 0 {
				ncond = len(a.Conds)
			}
			detail := fmt.Sprintf("Best score: patch %d (normalised IQM %s, pooled over the clean cell and %d stress conditions).", a.Cands[best], ch.Score[best].String(), max(ncond-1, 0))
			if pick != best {
				v := ch.Versus[pick]
				detail += fmt.Sprintf(" Patch %d is shown non-inferior at lower cost: best − it = %s, below the margin %s (Holm-adjusted p %s).", a.Cands[pick], v.Diff.String(), fmtG(ch.Margin), fmtP(v.PAdj))
			} else if ch.Cheaper {
				if ch.More > 0 {
					detail += fmt.Sprintf(" Not enough evidence for a cheaper size: run %d more episodes per condition (%d in all per cell; power %.0f%% estimate from the observed spread).", max(ch.More-d.Episodes, 1), ch.More, 100*choose.DefaultPower)
				} else {
					detail += " No cheaper size comes within the margin " + fmtG(ch.Margin) + ": its observed difference is at or past it, so more episodes are not expected to show it non-inferior."
				}
			}
			if budget > 0 {
				detail += fmt.Sprintf(" Budget: %s %s.", fmtG(budget), unit)
			}
			rec.Detail = detail
		}
		rd.Recommendation = rec
	}
}

func fmtP(p float64) string {
	if p < 0.001 {
		return "< 0.001"
	}
	return strconv.FormatFloat(p, 'g', 2, 64)
}

func (a *Analysis) curveSections(rd *report.Data) {
	// One chart per axis name: a series per context.
	var names []string
	byName := map[string][]AxisCurve{}
	for _, cv := range a.Curves {
		if _, ok := byName[cv.Axis]; !ok {
			names = append(names, cv.Axis)
		}
		byName[cv.Axis] = append(byName[cv.Axis], cv)
	}
	for _, n := range names {
		ch := report.Curves{Title: "Retention against " + n, XLabel: n, YLabel: "normalised retention ((IQM − floor) / (clean IQM − floor))", Threshold: a.Plan.Def.Stats.Threshold}
		hm := report.Heatmap{Title: "IQM return: " + n, XLabel: n, YLabel: "condition"}
		cols := map[float64]bool{}
		for _, cv := range byName[n] {
			for _, s := range cv.Severities {
				cols[s] = true
			}
		}
		var xs []float64
		for s := range cols {
			xs = append(xs, s)
		}
		sort.Float64s(xs)
		for _, s := range xs {
			hm.X = append(hm.X, fmtG(s))
		}
		for _, cv := range byName[n] {
			se := report.Series{Name: cv.Context}
			row := make([]float64, len(xs))
			for i := range row {
				row[i] = math.NaN()
			}
			for k, ci := range cv.Cells {
				cs := a.Cells[ci]
				if r := cs.Retention; r != nil {
					se.Points = append(se.Points, report.CurvePoint{X: cv.Severities[k], Y: r.Value, Lo: r.Lo, Hi: r.Hi})
				}
				if cs.Summary != nil {
					row[sort.SearchFloat64s(xs, cv.Severities[k])] = cs.Summary.IQM.Value
				}
			}
			if len(se.Points) > 0 {
				ch.Series = append(ch.Series, se)
			}
			hm.Y = append(hm.Y, cv.Context)
			hm.Z = append(hm.Z, row)
		}
		if len(ch.Series) > 0 {
			rd.Curves = append(rd.Curves, ch)
		}
		if len(hm.Y) > 0 && len(hm.X) > 1 {
			rd.Heatmaps = append(rd.Heatmaps, hm)
		}
	}
}

// StripMeta describes a strip PNG: the steps kept and the frame sizes.
type StripMeta struct {
	Format int   `json:"format"`
	Steps  []int `json:"steps"`
	// Width and Height are the size of one column; Gap the border.
	Width, Height, Gap int
	// Overlay is the attention overlay drawn on the strip ("" none).
	Overlay string `json:"overlay,omitempty"`
}

// maxStripPixels bounds the strip images read back for the report.
const maxStripPixels = 1 << 25

// LoadStrip reads the strip of cell from dir (nil when there is none).
func LoadStrip(dir string, cell int) (image.Image, *StripMeta) {
	base := filepath.Join(dir, study.StripsDir, fmt.Sprintf("cell-%04d", cell))
	data, err := os.ReadFile(base + ".json")
	if err != nil {
		return nil, nil
	}
	var m StripMeta
	if json.Unmarshal(data, &m) != nil || m.Format != 1 || m.Width <= 0 || m.Height <= 0 {
		return nil, nil
	}
	f, err := os.Open(base + ".png")
	if err != nil {
		return nil, nil
	}
	defer f.Close()
	// The header first: a strip is a few frames wide, so anything near
	// the pixel budget of a frame folder is not one of ours.
	if cfg, err := png.DecodeConfig(f); err != nil || int64(cfg.Width)*int64(cfg.Height) > maxStripPixels {
		return nil, nil
	}
	if _, err := f.Seek(0, io.SeekStart); err != nil {
		return nil, nil
	}
	img, err := png.Decode(f)
	if err != nil {
		return nil, nil
	}
	return img, &m
}

// StripFrame cuts column k of row (0 raw, 1 seen) out of a strip.
func StripFrame(img image.Image, m *StripMeta, k, row int) image.Image {
	if k < 0 || k >= len(m.Steps) {
		return nil
	}
	x := m.Gap + k*(m.Width+m.Gap)
	y := m.Gap + row*(m.Height+m.Gap)
	r := image.Rect(x, y, x+m.Width, y+m.Height)
	if !r.In(img.Bounds()) {
		return nil
	}
	out := image.NewRGBA(image.Rect(0, 0, m.Width, m.Height))
	draw.Draw(out, out.Bounds(), img, r.Min, draw.Src)
	return out
}

func (a *Analysis) stripSections(rd *report.Data, dir string) {
	// The clean reference of the first patch size over time, raw and seen.
	for i := range a.Plan.Cells {
		if a.Plan.Reference(i) != i {
			continue
		}
		img, m := LoadStrip(dir, i)
		if img == nil {
			continue
		}
		st := report.Strip{Title: fmt.Sprintf("Clean, patch %d: the game's frames over episode 0", a.Plan.Cells[i].Patch)}
		for k, s := range m.Steps {
			st.Frames = append(st.Frames, report.Frame{Label: fmt.Sprintf("step %d", s), Image: StripFrame(img, m, k, 0)})
		}
		rd.Strips = append(rd.Strips, st)
		break
	}
	shown := 0
	for _, cv := range a.Curves {
		if shown >= 8 {
			break
		}
		st := report.Strip{Title: fmt.Sprintf("What the policy saw: %s (%s)", cv.Axis, cv.Context),
			Caption: "Episode 0 of each cell, the same game seed in every cell."}
		for k, ci := range cv.Cells {
			img, m := LoadStrip(dir, ci)
			if img == nil {
				continue
			}
			col := min(2, len(m.Steps)-1)
			st.Frames = append(st.Frames, report.Frame{Label: fmt.Sprintf("%s, step %d", fmtG(cv.Severities[k]), m.Steps[col]), Image: StripFrame(img, m, col, 1)})
		}
		if len(st.Frames) > 0 {
			addLegend(&st, dir, cv.Cells)
			rd.Strips = append(rd.Strips, st)
			shown++
		}
	}
}

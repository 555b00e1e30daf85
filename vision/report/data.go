// Package report writes the outputs of a study: report.html (one
// self-contained page, no external assets, charts as inline SVG drawn with
// gonum/plot, frames as inline PNG data), summary.md (the headline and the
// tables in Markdown) and cells.csv (one row per cell, columns documented
// in docs/report.md).
//
// The study runner fills a Data from recorded results and calls Write.
// Write is deterministic: the same Data gives the same bytes (no clock is
// read; pass a time in Data.Generated if one should appear). Every string
// in Data is escaped before it reaches the HTML.
package report

import (
	"image"

	"tilebench/vision"
	"tilebench/vision/stats"
	"tilebench/vision/stats/breakpoint"
)

// Data is everything a report shows. Only Title is required; empty
// sections are left out of the page. Slices are shown in the order given.
type Data struct {
	// Title heads the page, e.g. "Patch-size study: drive / attention".
	Title string
	// Kind is a short label of the study kind shown above the title, e.g.
	// "stress study" or "patch-size study". Optional.
	Kind string
	// Generated is shown verbatim as the time of writing, e.g. an RFC 3339
	// time. Empty leaves it out (Write never reads the clock).
	Generated string
	// Run says what was run and how to reproduce it.
	Run Run
	// Recommendation is the headline finding of a patch-size study; nil
	// when there is none.
	Recommendation *Recommendation
	// Breaks are the breaking points of the stress axes, shown in the
	// headline as one table, the earliest breaks first.
	Breaks []Break
	// Findings are further headline facts (label and value), e.g.
	// {"clean IQM", "412 [398, 425]"}. Optional. Up to three get a card
	// each; with more, the first two do and the rest share one card.
	Findings []KV
	// Costs is the cost table, one row per candidate (patch size).
	Costs []Cost
	// Heatmaps are score grids, e.g. patch size × occlusion ratio.
	Heatmaps []Heatmap
	// Curves are severity curves with interval bands.
	Curves []Curves
	// Pareto is the score-versus-cost chart; nil leaves it out.
	Pareto *Pareto
	// Strips are rows of frames showing what the policy saw.
	Strips []Strip
	// Cells is the per-cell table (and cells.csv), one entry per cell.
	Cells []Cell
	// Tables are further tables (failures, paired comparisons, the
	// evidence behind a recommendation), shown after the cost table in
	// the order given. A table is always shown when given: a value that
	// is undefined is a row that says why.
	Tables []Table
	// Notes are free remarks shown at the end (before the caution).
	Notes []string
	// BreakRule, if set, replaces the sentence under the breaks table
	// that states the breaking rule (for reports whose breaks are not
	// retention thresholds, such as a probe's drift).
	BreakRule string
	// Units names what Run.Episodes counts in the masthead; "" means
	// "episodes".
	Units string
}

// Table is a titled table of text cells.
type Table struct {
	// ID is the HTML anchor ("failures"); Title heads the table; Nav
	// names it in the page's navigation ("" means the title up to a colon
	// or parenthesis).
	ID, Title, Nav string
	// Caption is one or two sentences under the title: what is counted,
	// how intervals were made, what pairing was used.
	Caption string
	// Columns name the columns; every row has len(Columns) cells.
	Columns []string
	// Rows are the rows, top to bottom.
	Rows [][]string
}

// KV is a labelled value.
type KV struct {
	Key, Value string
}

// Run describes what was run, enough to reproduce it.
type Run struct {
	// Command is the command line that reproduces the study, shown as code
	// and copyable, e.g. "tilebench stress --game drive ...".
	Command string
	// Seed is the study seed.
	Seed uint64
	// Params are the study's settings in display order, e.g. game,
	// variation, policy, episodes per cell, seed range, workers.
	Params []KV
	// Versions are program and library versions, e.g. {"tilebench",
	// "v0.3.0"}, {"go", "go1.26.8"}.
	Versions []KV
	// Episodes is the number of finished episodes behind the report.
	Episodes int
	// Failures is the number of episodes that failed (policy error,
	// timeout, ...).
	Failures int
}

// Recommendation is the headline of a patch-size study.
type Recommendation struct {
	// Choice names the recommended candidate, e.g. "patch 8"; empty when
	// nothing fits (then Detail should say why).
	Choice string
	// Rule states the rule applied (choose.Rule, or your own wording).
	Rule string
	// Detail is one or two sentences of context, e.g. "scores 96% of the
	// best (patch 4) at 31% of its cost; budget 200 µs/step".
	Detail string
}

// Break is the breaking point of one stress axis.
type Break struct {
	// Axis names the axis, e.g. "random occlusion ratio".
	Axis string
	// Context says where on the study the axis was measured, e.g.
	// "patch 8, scramble full". Optional: when empty and Axis ends in a
	// parenthesised part ("random occlusion ratio (patch 8)"), that part
	// is shown as the context.
	Context string
	// Break is the result of breakpoint.BreakingPoint (its FirstDip is shown
	// as a secondary figure).
	Break breakpoint.Break
	// Note says why an axis has no breaking point (Break is then zero).
	Note string
}

// Cost is one row of the cost table.
type Cost struct {
	// Name labels the candidate, e.g. "patch 8".
	Name string
	// Patch is the patch size in pixels (0 to leave the column empty).
	Patch int
	// Tokens is the number of tokens per frame (0: empty).
	Tokens int
	// MFLOP is the cost model's mega floating-point operations per step.
	MFLOP float64
	// Params is the number of parameters of the policy.
	Params int
	// LatencyUS is the measured latency per step in microseconds.
	LatencyUS float64
	// Score is the candidate's score with its interval (NaN Value: empty).
	Score stats.Estimate
	// Pick marks the recommended candidate.
	Pick bool
	// OverBudget marks candidates over the budget.
	OverBudget bool
}

// Heatmap is a grid of values, drawn as coloured cells with the value
// printed in each.
type Heatmap struct {
	// Title heads the chart, e.g. "IQM return: patch size × occlusion".
	Title string
	// XLabel and YLabel name the column and row variables.
	XLabel, YLabel string
	// X are the column labels, Y the row labels (top to bottom).
	X, Y []string
	// Z[row][col] are the values, len(Y) rows of len(X); NaN marks a
	// missing cell.
	Z [][]float64
	// Format is the fmt verb for the printed values; "" means three
	// significant digits, as elsewhere in the report.
	Format string
}

// Curves is one chart of severity curves (e.g. retention against
// occlusion ratio, one series per patch size or occlusion kind).
type Curves struct {
	// Title heads the chart.
	Title string
	// XLabel and YLabel name the axes.
	XLabel, YLabel string
	// Series are the lines, each with an interval band.
	Series []Series
	// Threshold, if non-zero, is drawn as a dashed horizontal line (e.g.
	// the breaking threshold 0.5 on a retention chart).
	Threshold float64
}

// Series is one line of a Curves chart.
type Series struct {
	// Name labels the line in the legend.
	Name string
	// Points are the measured severities, in any order (drawn sorted by X).
	Points []CurvePoint
}

// CurvePoint is one point with its interval; Lo and Hi bound the band.
type CurvePoint struct {
	X, Y, Lo, Hi float64
}

// Pareto is the score-versus-cost chart.
type Pareto struct {
	// Title heads the chart; "" means "Score against cost".
	Title string
	// XLabel names the cost (e.g. "MFLOP per step"), YLabel the score.
	XLabel, YLabel string
	// LogX draws the cost axis on a log scale (costs must be positive).
	LogX bool
	// Budget, if non-zero, is drawn as a vertical dashed line.
	Budget float64
	// Points are the candidates. The front is computed by Write with
	// choose.ParetoFront from Cost and Score.Value.
	Points []ParetoPoint
}

// ParetoPoint is one candidate on the Pareto chart.
type ParetoPoint struct {
	// Label is printed beside the point, e.g. "8".
	Label string
	// Cost is the x coordinate.
	Cost float64
	// Score is the y coordinate with its interval (drawn as an error bar).
	Score stats.Estimate
	// Pick marks the recommended candidate (drawn highlighted).
	Pick bool
}

// Strip is a row of frames, e.g. one frame per occlusion ratio.
type Strip struct {
	// Title heads the strip, e.g. "random occlusion, patch 8".
	Title string
	// Caption is a sentence under the strip. Optional.
	Caption string
	// Frames are shown left to right, scaled up without smoothing.
	Frames []Frame
}

// Frame is one picture of a strip.
type Frame struct {
	// Label is printed under the picture, e.g. "ratio 0.3".
	Label string
	// Image is the frame; it is PNG-encoded into the page. Nil frames are
	// skipped.
	Image image.Image
}

// Cell is one row of the per-cell table and of cells.csv.
type Cell struct {
	// ID is the cell's stable key, e.g. "p8/occlude=random:0.3".
	ID string
	// Patch is the patch size (0: empty column).
	Patch int
	// Axis names the stress axis of the cell ("clean" for the baseline),
	// Kind its variant (e.g. "random", "block"), Severity its value.
	Axis, Kind string
	Severity   float64
	// Params are all cell parameters in a stable order; cells.csv joins
	// them as "key=value; key=value".
	Params []KV
	// Episodes is the number of recorded episodes, Failures the errors
	// among them (episodes that could not be played: a policy crash, a bad
	// action), which are scored at the study's worst return.
	Episodes, Failures int
	// GameFailed and TimeUp are the shares of played episodes ended by
	// the game's failure rule and by the step limit, with Wilson
	// intervals; zero Of when not measured.
	GameFailed, TimeUp stats.Rate
	// CVaR is the mean of the worst 10% of the returns; nil when not
	// measured.
	CVaR *float64
	// Expert is the share of expert (normalised against the scripted
	// expert); nil when not measured.
	Expert *stats.Estimate
	// Warn flags an unstable statistic (a ratio over a clean score near
	// the floor).
	Warn string
	// Summary holds the statistics (stats.Bootstrap.Summarize).
	Summary stats.Summary
	// Retention is the normalised retention, (stressed − floor) / (clean
	// − floor); nil for the clean cell or when undefined (Note says why).
	Retention *stats.Estimate
	// Note is a short remark, e.g. the most common failure reason.
	Note string
}

// Caution is the safety caution every report carries: vision.Caution,
// the one text of it.
const Caution = vision.Caution

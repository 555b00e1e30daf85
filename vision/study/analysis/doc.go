// Package analysis turns a study's recorded results (study.json,
// results.jsonl, timing.jsonl, costs.json and the strips) into
// statistics — per-cell summaries, retention, breaking points along each
// stress axis, the patch-size recommendation — and those into the
// report's data (vision/report). It depends only on what is recorded, so
// the same folder always gives the same report.
//
// To add a report section, compute its numbers in Analyze (or a method
// of Analysis) and map them in ReportData.
package analysis

import "strconv"

func fnum(v float64) string { return strconv.FormatFloat(v, 'g', -1, 64) }

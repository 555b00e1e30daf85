package main

import (
	"fmt"
	"path/filepath"
	"tilebench/vision/study/analysis"
)

func init() {
	register(&command{name: "report", summary: "re-make the report (HTML, summary.md, cells.csv) of a study folder from its recorded results", run: runReport})
}

const reportUsage = `report DIR

Re-makes DIR/report.html, DIR/summary.md and DIR/cells.csv from the
recorded results (study.json, results.jsonl, costs.json, strips/); the
same results give the same files. Every study writes them at its end.
A probe's folder is not a study: its probe command run again with
--resume re-makes its report.

  tilebench report stress-drive

options:`

func runReport(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "report", reportUsage)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() != 1 {
		return usagef("report: want one study folder DIR")
	}
	dir := fs.Arg(0)
	if isProbeDir(dir) {
		return usagef("report: %s is a probe (probe.json), not a study: run its probe command again with --resume to re-make the report (the command is under \"Reproduce\" in its summary.md)", dir)
	}
	if err := analysis.WriteReport(dir); err != nil {
		return err
	}
	fmt.Fprintf(ctx.stdout, "report: %s\n", filepath.Join(dir, "report.html"))
	return nil
}

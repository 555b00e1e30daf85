package main

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"tilebench/vision/study/runner"
)

func init() {
	register(&command{name: "merge", summary: "join the folders of a sharded study into one (results byte-identical to an unsharded run)", run: runMerge})
}

const mergeUsage = `merge [options] OUT DIR...

Joins the folders of one study's shards (tilebench stress/sizes --shard i/n)
into the new folder OUT: results.jsonl in canonical order (by cell, then
episode), byte-identical to an unsharded run's, timing, strips and the
report. Folders of different studies are refused; OUT must be new or empty.
The shards of a probe (tilebench probe --shard i/n) are joined the same
way, as "tilebench probe merge --out OUT DIR..." does.

  tilebench merge stress-all stress-0 stress-1 stress-2

options:`

func runMerge(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "merge", mergeUsage)
	asJSON := fs.Bool("json", false, "print a machine-readable summary")
	partial := fs.Bool("allow-partial", false, "merge even when episodes are missing (a shard not given or not finished); exit status 3 then")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() < 2 {
		return usagef("merge: want OUT and at least one study folder")
	}
	out := fs.Arg(0)
	if isProbeDir(fs.Arg(1)) { // probe shards (probe.go)
		pa := []string{"--out", out, fmt.Sprintf("--json=%v", *asJSON), fmt.Sprintf("--allow-partial=%v", *partial)}
		return runProbeMerge(ctx, append(pa, fs.Args()[1:]...))
	}
	mo, err := runner.MergeWith(out, fs.Args()[1:], runner.MergeOptions{WriteReport: true, AllowPartial: *partial})
	if err != nil {
		return err
	}
	var status error
	if mo.Missing > 0 || mo.Failed > 0 {
		status = exitError{ExitFailedEpisodes, fmt.Errorf("merged with %d episodes missing and %d failed", mo.Missing, mo.Failed)}
	}
	rep := filepath.Join(out, "report.html")
	if *asJSON {
		b, err := json.MarshalIndent(map[string]any{"format": 1, "dir": out, "episodes": mo.Episodes,
			"missing": mo.Missing, "failed": mo.Failed, "report": rep}, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return status
	}
	fmt.Fprintf(ctx.stdout, "merged %d episodes into %s (%d missing, %d failed)\n", mo.Episodes, out, mo.Missing, mo.Failed)
	if mo.Missing > 0 {
		fmt.Fprintf(ctx.stdout, "some shards are incomplete: finish them with --resume and merge again\n")
	}
	fmt.Fprintf(ctx.stdout, "report: %s\n", rep)
	return status
}

package main

import (
	"encoding/json"
	"fmt"
	"path/filepath"
	"strconv"

	"tilebench/vision/study"
	"tilebench/vision/study/runner"
)

func init() {
	register(&command{name: "replay", summary: "re-run one episode of a recorded study alone and compare its return", run: runReplay})
}

const replayUsage = `replay [options] DIR --cell C --episode E

Plays episode E of cell C of the study in DIR again, alone, with the seeds
the study derived for it (docs/studies.md), and prints its return beside
the recorded one. Cells and episodes count from 0 (results.jsonl fields
"cell" and "episode"). Exit status 1 if they differ.

  tilebench replay stress-drive --cell 3 --episode 7

options:`

func runReplay(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "replay", replayUsage)
	cell := fs.Int("cell", -1, "cell index `C` (from 0)")
	ep := fs.Int("episode", -1, "episode index `E` (from 0)")
	asJSON := fs.Bool("json", false, "print the fresh record as JSON")
	// Flags may come after DIR.
	var dir string
	if len(args) > 0 && len(args[0]) > 0 && args[0][0] != '-' {
		dir, args = args[0], args[1:]
	}
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if dir == "" && fs.NArg() > 0 {
		dir = fs.Arg(0)
	} else if fs.NArg() > 0 {
		return usagef("replay: unexpected argument %q", fs.Arg(0))
	}
	if dir == "" {
		return usagef("replay: want the study folder DIR")
	}
	if *cell < 0 || *ep < 0 {
		return usagef("replay: give --cell C and --episode E (both from 0)")
	}
	si, err := study.ReadInfo(dir)
	if err != nil {
		return err
	}
	p, err := si.Plan()
	if err != nil {
		return err
	}
	fresh, rec, err := runner.Replay(dir, *cell, *ep, runner.DefaultEnv(p, filepath.Join(dir, study.LogsDir)))
	if err != nil {
		return err
	}
	if *asJSON {
		b, err := json.Marshal(fresh)
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
	} else {
		what := fresh.Params.Label()
		if fresh.Params.Policy != "" {
			what = "policy " + fresh.Params.Policy + ", " + what
		}
		fmt.Fprintf(ctx.stdout, "cell %d (%s) episode %d: game seed %d, pipeline seed %d\n", *cell, what, *ep, fresh.GameSeed, fresh.PipeSeed)
		fmt.Fprintf(ctx.stdout, "return %s, %d steps, %s\n", strconv.FormatFloat(fresh.Return, 'g', -1, 64), fresh.Steps, fresh.End)
		if fresh.Failed() {
			fmt.Fprintf(ctx.stdout, "failure: %s\n", fresh.Failure)
		}
	}
	if rec == nil {
		if !*asJSON {
			fmt.Fprintln(ctx.stdout, "no recorded result for this episode")
		}
		return nil
	}
	if rec.Return != fresh.Return || rec.Steps != fresh.Steps || rec.End != fresh.End {
		return fmt.Errorf("replay differs from the record: return %v, %d steps, %s recorded; %v, %d steps, %s now",
			rec.Return, rec.Steps, rec.End, fresh.Return, fresh.Steps, fresh.End)
	}
	if !*asJSON {
		fmt.Fprintln(ctx.stdout, "matches the recorded result")
	}
	return nil
}

package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"

	"tilebench/vision/policies"
	"tilebench/vision/probe"
	"tilebench/vision/study"
)

func init() {
	register(&command{name: "probe", summary: "stress your own policy on your own recorded frames (no game): how far its action moves", run: runProbe})
}

const probeUsage = `probe --in FRAMES --policy POLICY [options] --out DIR
       tilebench probe merge --out DIR SHARD_DIR...

Runs the policy over every recorded sequence twice, clean and transformed
(same policy seed), for every combination of the transform axes (a cell),
and measures per frame how far the action moved; with --actions, also the
error against the recorded actions. Writes DIR/results.jsonl (one line
per sequence per cell), DIR/report.html, DIR/summary.md, DIR/cells.csv
and DIR/summary.json. Lists take the range syntax of "tilebench stress".

FRAMES: a folder of .png/.jpg frames, a .gif, a .npy (uint8 N×H×W×C or
N×H×W) or a .rgb/.raw file (--size WxH). POLICY: a weights FILE
({patch} is replaced by each patch size), fresh (untrained --family),
exec:COMMAND ARGS or tcp://HOST:PORT (docs/policy-protocol.md).

examples:
  tilebench probe --in recorded.npy --policy 'exec:python3 my_policy.py' --action-space continuous:2 \
    --patch 8 --occlude random:0:0.8:0.1,block:0.3 --scramble none,full --noise-tokens 0,16 --out probe-mine
  tilebench probe --in frames/ --episodes episodes.csv --actions actions.npy \
    --policy testdata/policies/drive-attention-p8.safetensors --occlude random:0:0.6:0.2 --scramble none,full --out probe-ref
  tilebench probe --in demos/frames.npy --episodes demos/episode_starts.npy --actions demos/actions.npy \
    --policy 'exec:python3 my_policy.py' --occlude random:0:0.6:0.2 --out probe-demos   # a "tilebench record" dataset as it is

Without a transform option only the clean cell runs, whose drift is zero
for a reproducible policy.

A probe stopped by Ctrl-C or a kill continues with --resume; --shard i/n
runs one part and "tilebench probe merge" (or "tilebench merge") joins the
parts (docs/probe.md).

options:`

func runProbe(ctx *runContext, args []string) error {
	if len(args) > 0 && args[0] == "merge" {
		return runProbeMerge(ctx, args[1:])
	}
	fs := newFlags(ctx, "probe", probeUsage)
	var c probe.Config
	fs.StringVar(&c.In, "in", "", "recorded `FRAMES`: folder, .gif, .npy, .rgb/.raw")
	size := fs.String("size", "", "frame size `WxH` of raw .rgb/.raw input")
	fs.StringVar(&c.Episodes, "episodes", "", "sequence boundaries `FILE`: a .npy bool/uint8 mask per frame (record's episode_starts.npy) or integer start indices; or text: one start index per line, or a sequence column with one id per frame")
	fs.StringVar(&c.Actions, "actions", "", "recorded actions `FILE.npy`, one row per frame (N or N×W)")
	pf := policies.AddFlags(fs, policies.FlagConfig{Usage: "the policy: a weights FILE, fresh, exec:COMMAND ARGS or tcp://HOST:PORT"})
	fs.StringVar(&c.Family, "family", "attention", "network `FAMILY` of --policy fresh: attention, posattention, mlp, meanpool")
	fs.StringVar(&c.ActionSpace, "action-space", "", "`SPACE` of a fresh or external policy: continuous:N, continuous:N:LOW:HIGH or discrete:K (default: from --actions)")
	fs.StringVar(&c.Resize, "resize", "", "scale frames to `WxH` (the policy's frame size) with a triangle filter")
	noBatch := fs.Bool("no-batch", false, "send one frame per message even to a policy that offers batches")
	patchList := fs.String("patch", "", "patch `SIZES` in pixels (default: the weights file's, else 8)")
	tf := addSweepFlags(fs)
	fs.Uint64Var(&c.Seed, "seed", 0, "probe seed; every seed derives from it")
	fs.IntVar(&c.Resamples, "resamples", 0, "bootstrap resamples (default 2000)")
	fs.Float64Var(&c.Threshold, "threshold", 0, "drift past which an axis counts as broken (default 0.1: L2 action change, or share of changed choices)")
	fs.StringVar(&c.Name, "name", "", "probe `NAME` shown in the report")
	workers := fs.Int("workers", 0, "parallel workers (0: one per core); results do not depend on it")
	out := fs.String("out", "", "output folder `DIR`")
	resume := fs.Bool("resume", false, "continue the probe already in --out")
	shard := fs.String("shard", "", "run one part `i/n` of the probe")
	asJSON := fs.Bool("json", false, "print the summary as JSON on stdout")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("probe: unexpected argument %q", fs.Arg(0))
	}
	if *out == "" {
		return usagef("probe: --out DIR is required")
	}
	if *size != "" {
		w, h, err := parseWxH(*size)
		if err != nil {
			return usagef("--size: %v", err)
		}
		c.RawWidth, c.RawHeight = w, h
	}
	c.NoBatch = *noBatch
	c.Patch = study.ParseAxis(*patchList)
	tf.apply(&c.Axes, true)
	if _, err := pf.Options(); err != nil {
		return usagef("probe: %v", err)
	}
	c.Policy, c.Timeout, c.StartTimeout = pf.Source, pf.Timeout.Text, pf.StartTimeout.Text
	c.Obs, c.Dtype, c.Clamp = pf.Obs, pf.Dtype, pf.Clamp
	sh, err := parseShardFlag(*shard)
	if err != nil {
		return err
	}
	p, err := probe.NewPlan(c)
	if err != nil {
		if ferr := flagError(fs, false, err); ferr != nil {
			return ferr
		}
		return usageError{err}
	}
	bar := newProgress(ctx.stderr, 0, "probe")
	sctx, stop := interruptible()
	defer stop()
	var polFunc probe.PolicyFunc
	if pf.LogDir != "" {
		polFunc = probe.Policies(p, pf.LogDir)
	}
	o, err := probe.Run(sctx, p, probe.Options{Dir: *out, Policy: polFunc, Workers: *workers, Resume: *resume, Shard: sh,
		Command: commandLine(append([]string{"probe"}, args...)),
		Progress: func(done, total int) {
			if bar.bar == nil && total > 0 {
				bar = newProgress(ctx.stderr, total, "probe")
			}
			bar.Set(done)
		}})
	bar.Done()
	if err != nil {
		return err
	}
	if *asJSON {
		if err := printProbeJSON(ctx, *out); err != nil {
			return err
		}
	} else {
		fmt.Fprintf(ctx.stdout, "probe %s: %d units (%d kept, %d run, %d frames twice) in %.1fs; report %s\n",
			p.Fingerprint, o.Total, o.Kept, o.Ran, o.Frames, o.Elapsed.Seconds(), filepath.Join(*out, "report.html"))
	}
	if o.Failed > 0 {
		return fmt.Errorf("%d of %d units failed (first: %s); --resume retries them", o.Failed, o.Total, o.FirstFailure)
	}
	return nil
}

func parseWxH(s string) (int, int, error) {
	var w, h int
	if n, err := fmt.Sscanf(s, "%dx%d", &w, &h); err != nil || n != 2 || w <= 0 || h <= 0 {
		return 0, 0, errors.New("want WxH, e.g. 160x120")
	}
	return w, h, nil
}

const probeMergeUsage = `probe merge --out DIR SHARD_DIR...

Joins the folders of one probe's shards (tilebench probe --shard i/n) into
the new folder DIR: the same results.jsonl bytes and report as an
unsharded run. "tilebench merge DIR SHARD_DIR..." does the same.

options:`

func runProbeMerge(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "probe merge", probeMergeUsage)
	out := fs.String("out", "", "output folder `DIR` (new or empty)")
	asJSON := fs.Bool("json", false, "print a machine-readable summary")
	partial := fs.Bool("allow-partial", false, "merge even when units are missing (a shard not given or not finished); exit status 3 then")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if *out == "" || fs.NArg() == 0 {
		return usagef("probe merge: want --out DIR and the shard folders")
	}
	mo, err := probe.MergeWith(*out, fs.Args(), probe.MergeOptions{WriteReport: true, AllowPartial: *partial})
	if err != nil {
		return err
	}
	// As a study's merge: missing or failed units are exit status 3.
	var status error
	if mo.Missing > 0 || mo.Failed > 0 {
		status = exitError{ExitFailedEpisodes, fmt.Errorf("merged with %d units missing and %d failed", mo.Missing, mo.Failed)}
	}
	rep := filepath.Join(*out, "report.html")
	_, repErr := os.Stat(rep)
	if *asJSON {
		m := map[string]any{"format": 1, "dir": *out, "units": mo.Units, "missing": mo.Missing, "failed": mo.Failed}
		if repErr == nil {
			m["report"] = rep
		}
		b, err := json.MarshalIndent(m, "", "  ")
		if err != nil {
			return err
		}
		fmt.Fprintln(ctx.stdout, string(b))
		return status
	}
	fmt.Fprintf(ctx.stdout, "merged %d units into %s (%d missing, %d failed)\n", mo.Units, *out, mo.Missing, mo.Failed)
	if repErr == nil {
		if mo.Missing > 0 {
			fmt.Fprintf(ctx.stdout, "the report covers the units present; run the missing shards and merge again\n")
		}
		fmt.Fprintf(ctx.stdout, "report: %s\n", rep) // as a study's merge prints it
	}
	return status
}

// isProbeDir reports whether dir holds a probe (for "tilebench merge").
func isProbeDir(dir string) bool {
	_, err := os.Stat(filepath.Join(dir, probe.ProbeFile))
	return err == nil
}

// printProbeJSON prints the statistics of the probe in dir as JSON.
func printProbeJSON(ctx *runContext, dir string) error {
	in, err := probe.ReadInfo(dir)
	if err != nil {
		return err
	}
	all, _, err := probe.ReadResults(dir)
	if err != nil {
		return err
	}
	s, err := probe.Analyze(&in.Plan, all)
	if err != nil {
		return err
	}
	b, err := json.MarshalIndent(s, "", " ")
	if err != nil {
		return err
	}
	fmt.Fprintln(ctx.stdout, string(b))
	return nil
}

// parseShardFlag reads --shard i/n ("" is the whole run).
func parseShardFlag(v string) (study.Shard, error) {
	if v == "" {
		return study.Shard{}, nil
	}
	s, err := study.ParseShard(v)
	if err != nil {
		return s, usagef("--%v", err)
	}
	return s, nil
}

package main

import (
	"encoding/json"
	"fmt"
	"strings"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/policies"
	"tilebench/vision/record"
)

const recordUsage = `record --game drive|paddle --out DIR [--policy expert] [options]

Plays episodes of a built-in game on training seeds and writes what the
policy saw and did as a dataset NumPy reads alone: one .npy file per array
(frames or token sets, actions, previous actions, rewards, episode starts,
seeds, step indices) and manifest.json (docs/recording.md). The expert
drives by default; with --policy another policy drives, and --relabel adds
the expert's action at every step (labels.npy), DAgger-style. The
transform options (--occlude, --scramble, ...) change what is recorded.

Episodes stream to disk one by one; an interrupted recording continues
with --resume (same options; --episodes may grow).

examples:
  tilebench record --game drive --episodes 20 --out demos/
  tilebench record --game paddle --episodes 50 --obs tokens --scramble full --out demos-tokens/
  tilebench record --game drive --policy 'exec:python3 examples/policy_torch.py --model m.pt' --relabel --episodes 10 --out dagger/
  tilebench record --game drive --episodes 300 --out demos/ --resume

options:`

func init() {
	register(&command{name: "record", summary: "record demonstrations (expert or any policy) as .npy files and a manifest", run: runRecord})
}

func runRecord(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "record", recordUsage)
	game := fs.String("game", "", "game to play: "+strings.Join(games.Names(), " or ")+" (e.g. --game drive)")
	variation := fs.String("variation", "", "game variation, names joined with + (e.g. --variation narrow)")
	size := fs.String("size", "", "frame size WxH instead of the game's default (drive only) (e.g. --size 64x64)")
	patchSize := fs.String("patch", "", "patch size N or WxH the transforms cut frames into; default a weights file's own, else a size that divides the frame (e.g. --patch 8)")
	episodes := fs.Int("episodes", 10, "episodes the dataset holds, 1 to 1000000 (e.g. --episodes 50)")
	seed := fs.Uint64("seed", games.TrainSeedStart, "game seed of the first episode, in the training range 0..999999 (e.g. --seed 500)")
	out := fs.String("out", "", "dataset folder `DIR`, new or empty (or being resumed) (e.g. --out demos/)")
	obs := fs.String("obs", record.ObsFrame, "what to record: frame (the frame the policy saw) or tokens (token sets with grid cells) (e.g. --obs tokens)")
	relabel := fs.Bool("relabel", false, "also record the scripted expert's action at every step (labels.npy) while --policy drives (e.g. --relabel)")
	resume := fs.Bool("resume", false, "continue the recording in --out after its last whole episode (e.g. --resume)")
	asJSON := fs.Bool("json", false, "print the manifest as JSON when done (e.g. --json)")
	pol := policies.AddFlags(fs, policies.FlagConfig{Default: policies.Expert, InitSeed: true,
		Usage: "who drives: " + policies.SourceHelp})
	tf := addTransformFlags(fs, patch.Spec{})
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("record: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
	case *game == "":
		return usagef("record: --game is required (%s)", strings.Join(games.Names(), " or "))
	case *out == "":
		return usagef("record: --out DIR is required")
	case *episodes < 1 || *episodes > 1_000_000:
		return usagef("record: --episodes %d: want 1 to 1000000", *episodes)
	case *obs != record.ObsFrame && *obs != record.ObsTokens:
		return usagef("record: --obs %q: want frame or tokens", *obs)
	case *relabel && pol.Source == policies.Expert:
		return usagef("record: --relabel needs --policy other than expert (the expert's actions are recorded anyway)")
	}
	spec, err := tf.Spec()
	if err != nil {
		return fmt.Errorf("record: %w", err)
	}
	g, err := openGame(*game, *variation, *size)
	if err != nil {
		return fmt.Errorf("record: %w", err)
	}
	grid, err := policies.GridFor(pol.Source, g.Spec(), *patchSize)
	if err != nil {
		return fmt.Errorf("record: %w", err)
	}
	cfg := record.Config{Game: g, Grid: grid, PolicySource: pol.Source, Relabel: *relabel, Spec: spec, Obs: *obs,
		Episodes: *episodes, Seed: *seed, Dir: *out, Resume: *resume}
	if err := record.Check(cfg); err != nil {
		return usageError{err}
	}
	if pol.Source != policies.Expert {
		opt, err := pol.Options()
		if err != nil {
			return fmt.Errorf("record: %w", err)
		}
		p, err := policies.Open(pol.Source, g, grid, opt)
		if err != nil {
			return fmt.Errorf("record: %w", err)
		}
		defer policies.Close(p)
		cfg.Policy = p
	}
	prog := newProgress(ctx.stderr, *episodes, "episodes")
	cfg.OnEpisode = func(i int, e record.Episode) {
		if !*asJSON {
			fmt.Fprintf(ctx.stdout, "episode %-4d seed %-8d return %10.2f  steps %5d  %s\n", i+1, e.Seed, e.Return, e.Steps, e.End)
		}
		prog.Set(i + 1)
	}
	m, err := record.Run(cfg)
	prog.Done()
	if err != nil {
		return err
	}
	if *asJSON {
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", "  ")
		return enc.Encode(m)
	}
	fmt.Fprintf(ctx.stdout, "wrote %d episodes, %d steps, to %s (%s, %s, transforms %s)\n", len(m.Episodes), m.Rows, *out, m.Game, m.Grid.Text, m.Transforms)
	fmt.Fprintf(ctx.stdout, "caution: %s\n", vision.Caution)
	return nil
}

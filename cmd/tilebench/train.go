package main

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"math"
	"os"
	"os/signal"
	"strconv"
	"strings"
	"syscall"
	"time"

	_ "tilebench/games/all" // register the built-in games
	"tilebench/internal/atomicfile"
	"tilebench/patch"
	"tilebench/vision/nets"
	"tilebench/vision/train"
	"tilebench/vision/weights"
)

func init() {
	register(&command{name: "train", summary: "train a policy by behaviour cloning, CMA-ES or ES", run: runTrain})
}

const trainUsage = `train --game drive|paddle --out FILE.safetensors [options]
       tilebench train --resume FILE.ckpt --out FILE.safetensors [--budget D] [--iters N]

Trains a policy family on a built-in game from its scripted expert
(--method clone: behaviour cloning with DAgger) or from episode returns
(--method cmaes, --method es), on training seeds only, then scores the
best weights on held-out seeds and writes them with that score.

Example:
  tilebench train --game drive --family attention --patch 8 --method clone --budget 5m --seed 1 --out drive-attention-8.safetensors`

func runTrain(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "train", trainUsage)
	game := fs.String("game", "", "game to train on: drive or paddle (required unless --resume)")
	variation := fs.String("variation", "", "game variation (default: the game's default)")
	family := fs.String("family", "attention", "policy family: "+strings.Join(nets.Families, ", "))
	patchSize := fs.Int("patch", 8, "square patch size in pixels")
	method := fs.String("method", "clone", "training method: clone (behaviour cloning with DAgger), cmaes or es")
	occlude := fs.String("occlude", "", "train-time occlusion, e.g. random:0.5, block:0.3, bands:0.2 (default none)")
	fill := fs.String("fill", "", "what occluded tokens become: black, mean, noise or drop (default black)")
	scramble := fs.String("scramble", "", "train-time scrambling: full, partial:F or local:K (default none)")
	noiseTok := fs.Int("noise-tokens", 0, "train-time extra tokens of uniform noise")
	corrupt := fs.String("corrupt", "", "train-time frame corruptions, one list, e.g. blur:1,jpeg:40 or shake:s2 (docs/studies.md; default none)")
	budget := fs.Duration("budget", 5*time.Minute, "training time budget, e.g. 90s, 5m (stops at the next iteration boundary)")
	iters := fs.Int("iters", 0, "stop after this many iterations (DAgger rounds or generations); 0 = until the budget or early stop. Use it for reproducible runs")
	seed := fs.Uint64("seed", 1, "seed of the initial weights and of every random stream")
	out := fs.String("out", "", "weights file to write (required)")
	ckpt := fs.String("checkpoint", "", "checkpoint file (default OUT.ckpt)")
	every := fs.Int("every", 1, "write the checkpoint every N iterations")
	resume := fs.String("resume", "", "continue the run saved in this checkpoint exactly")
	workers := fs.Int("workers", 0, "goroutines for episodes and gradients (default: all cores)")
	heldOut := fs.Int("heldout", 50, "held-out episodes scored at the end (0 skips)")
	jsonOut := fs.Bool("json", false, "print one JSON object per iteration and a summary, instead of text")
	initFile := fs.String("init", "", "start from these weights (e.g. behaviour-cloned, for --method es or cmaes)")
	keySize := fs.Int("key-size", 0, "attention key size (default 16)")
	queries := fs.Int("queries", 0, "attention queries (default 16)")
	hidden := fs.Int("hidden", 0, "head hidden width (default 32)")
	valueSize := fs.Int("value-size", 0, "attention value size (default 16)")
	keyHidden := fs.Int("key-hidden", 0, "attention: hidden tanh layer of this width in the key function (default 0: linear keys)")
	ctxFrames := fs.Int("context", 0, "frames each token carries (temporal context k; default 1)")
	prevAction := fs.Bool("prev-action", false, "give the policy the previous action")
	centre := fs.Bool("centre", true, "subtract the token set's mean token from every token before the policy reads it (--centre=false turns it off)")
	lr := fs.Float64("lr", 0, "learning rate (default: clone 3e-3, es 0.01)")
	batch := fs.Int("batch", 0, "clone: minibatch size (default 64)")
	epochs := fs.Int("epochs", 0, "clone: epochs over the aggregated data per round (default 2)")
	perRound := fs.Int("episodes-per-round", 0, "clone: episodes collected per DAgger round (default 4)")
	patience := fs.Int("patience", 0, "stop after this many validations without improvement (default: clone 8, es and cmaes 4; -1 never)")
	minIters := fs.Int("min-iters", 0, "early stopping waits for this many iterations (default: clone 12, es and cmaes 0; -1 none)")
	pairs := fs.Int("pairs", 0, "es: antithetic pairs per generation (default 16)")
	sigma := fs.Float64("sigma", 0, "es/cmaes: noise / initial step size (default es 0.05, cmaes 0.1)")
	decay := fs.Float64("weight-decay", 0.005, "es: L2 weight decay")
	popSize := fs.Int("population", 0, "cmaes: population λ (default 4+⌊3 ln n⌋)")
	fitEps := fs.Int("fitness-episodes", 0, "es/cmaes: episodes per fitness evaluation (default 2)")
	valEps := fs.Int("val-episodes", 0, "validation episodes for early stopping, on training seeds set aside (default 8)")
	forceWorkers := fs.Bool("force-workers", false, "accept --workers above 4 per core")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if err := refuseZero(fs, "lr", "batch", "epochs", "episodes-per-round", "pairs", "sigma", "population", "fitness-episodes",
		"val-episodes", "key-size", "queries", "hidden", "value-size"); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("train: unexpected argument %q", fs.Arg(0))
	}
	if *out == "" {
		return usagef("train: --out FILE.safetensors is required")
	}
	if *every < 1 || *iters < 0 || *budget < 0 || *heldOut < 0 || *workers < 0 || *valEps < 0 || *fitEps < 0 {
		return usagef("train: --every must be ≥ 1 and --iters, --budget, --heldout, --workers, --val-episodes, --fitness-episodes ≥ 0")
	}
	if *ckpt == "" {
		*ckpt = *out + ".ckpt"
	}
	for _, f := range []string{*out, *ckpt} {
		if err := atomicfile.CheckFile(f); err != nil {
			return usagef("train: %v", err)
		}
	}
	var tr *train.Trainer
	var err error
	if *resume != "" {
		if tr, err = train.Resume(*resume, *iters, budget.Seconds()); err != nil {
			return err
		}
	} else {
		if *game == "" {
			return usagef("train: --game is required (drive or paddle)")
		}
		if err := checkCorrupt("train", *corrupt); err != nil {
			return err
		}
		if *patchSize <= 0 {
			return usagef("train: --patch %d: want a positive size", *patchSize)
		}
		cfg := train.Config{
			Game: *game, Variation: *variation, Patch: *patchSize, Method: *method, Seed: *seed,
			Iters: *iters, Budget: *budget, Workers: *workers, ForceWorkers: *forceWorkers, Patience: *patience, MinIters: *minIters, FitnessEpisodes: *fitEps, ValEpisodes: *valEps,
			Net: nets.Config{Family: *family, KeySize: *keySize, Queries: *queries, Hidden: *hidden, PrevAction: *prevAction,
				ValueSize: *valueSize, KeyHidden: *keyHidden, Context: *ctxFrames, Centre: *centre},
			Augment: patch.Spec{Occlude: *occlude, Fill: *fill, Scramble: *scramble, NoiseTokens: *noiseTok, Corrupt: *corrupt},
			Clone:   train.CloneConfig{LR: *lr, Batch: *batch, Epochs: *epochs, EpisodesPerRound: *perRound},
			ES:      train.ESConfig{Pairs: *pairs, Sigma: *sigma, LR: *lr, WeightDecay: *decay},
			CMA:     train.CMAConfig{Population: *popSize, Sigma: *sigma},
		}
		if *budget == 0 {
			cfg.Budget = 5 * time.Minute
		}
		switch *method {
		case "clone", "cmaes", "es":
		default:
			return usagef("train: --method %q: want clone, cmaes or es", *method)
		}
		if *initFile != "" {
			if cfg.Init, err = nets.Load(*initFile); err != nil {
				return fmt.Errorf("--init: %w", err)
			}
		}
		if tr, err = train.New(cfg); err != nil {
			return usageError{fmt.Errorf("train: %w", err)}
		}
	}
	cfg := tr.Config()
	sctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()

	total, unit := cfg.Iters, "iterations"
	if total == 0 {
		total, unit = int(cfg.Budget.Seconds()), "seconds"
	}
	bar := newProgress(ctx.stderr, total, "train "+cfg.Method)
	enc := json.NewEncoder(ctx.stdout)
	onIter := func(p train.Progress) {
		if unit == "iterations" {
			bar.Set(p.Iter)
		} else {
			bar.Set(int(p.Elapsed.Seconds()))
		}
		bar.Describe(fmt.Sprintf("%s iter %d  best %.1f  mean %.1f  left %s", cfg.Method, p.Iter, p.Best, p.Mean, p.Left.Round(time.Second)))
		if *jsonOut {
			enc.Encode(iterJSON(p))
		}
	}
	res, err := tr.Run(sctx, onIter, *every, func() error { return tr.SaveCheckpoint(*ckpt) })
	bar.Done()
	if err != nil {
		if errors.Is(err, context.Canceled) {
			if cerr := tr.SaveCheckpoint(*ckpt); cerr != nil {
				return fmt.Errorf("interrupted, and the checkpoint could not be written: %w", cerr)
			}
			return fmt.Errorf("interrupted after %d iterations: checkpoint written to %s (continue with --resume %s)", res.Iters, *ckpt, *ckpt)
		}
		return err
	}
	if err := tr.SaveCheckpoint(*ckpt); err != nil {
		return err
	}
	var held, expert []float64
	if *heldOut > 0 {
		if held, err = tr.HeldOut(*heldOut); err != nil {
			return err
		}
		if expert, err = tr.ExpertHeldOut(*heldOut); err != nil {
			return err
		}
	}
	meta := tr.WeightsMeta(res, held, expert)
	if err := tr.WriteWeights(*out, meta); err != nil {
		return err
	}
	sum := map[string]any{
		"format": 1, "event": "done", "out": *out, "checkpoint": *ckpt, "game": cfg.Game, "family": cfg.Net.Family,
		"patch": cfg.Patch, "method": cfg.Method, "seed": cfg.Seed, "iters": res.Iters, "stopped": res.Stopped,
		"best_val": finite(res.BestVal), "elapsed_s": res.Elapsed.Seconds(), "heldout_episodes": len(held),
		"caution": train.Caution,
	}
	if len(held) > 0 {
		sum["heldout_score"], sum["heldout_iqm"] = num(meta[weights.KeyHeldOutScore]), num(meta["heldout_iqm"])
		sum["expert_score"], sum["expert_iqm"] = num(meta["heldout_expert_score"]), num(meta["heldout_expert_iqm"])
	}
	if *jsonOut {
		return enc.Encode(sum)
	}
	fmt.Fprintf(ctx.stdout, "trained %s %s patch %d on %s by %s: %d iterations (%s) in %s, best validation %.1f\n",
		cfg.Net.Family, cfg.Game, cfg.Patch, cfg.Game, cfg.Method, res.Iters, res.Stopped, res.Elapsed.Round(time.Second), res.BestVal)
	if len(held) > 0 {
		fmt.Fprintf(ctx.stdout, "held-out score over %d episodes: mean %s, IQM %s (scripted expert, reads game state: mean %s, IQM %s)\n",
			len(held), meta[weights.KeyHeldOutScore], meta["heldout_iqm"], meta["heldout_expert_score"], meta["heldout_expert_iqm"])
	}
	fmt.Fprintf(ctx.stdout, "wrote %s (checkpoint %s)\ncaution: %s\n", *out, *ckpt, train.Caution)
	return nil
}

func num(s string) any {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return nil
	}
	return finite(v)
}

func finite(v float64) any {
	if math.IsInf(v, 0) || math.IsNaN(v) {
		return nil
	}
	return v
}

func iterJSON(p train.Progress) map[string]any {
	return map[string]any{"format": 1, "event": "iter", "method": p.Method, "iter": p.Iter, "best": finite(p.Best), "mean": finite(p.Mean),
		"val": finite(p.Val), "best_val": finite(p.BestVal), "loss": p.Loss, "samples": p.Samples, "evals": p.Evals,
		"elapsed_s": p.Elapsed.Seconds(), "left_s": p.Left.Seconds()}
}

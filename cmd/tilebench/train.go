package main

import (
	"context"
	"encoding/json"
	"errors"
	"flag"
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
	"tilebench/vision"
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

// trainFlags are train's options, bound to the fields of the trainer's
// configuration.
type trainFlags struct {
	fs                                 *flag.FlagSet
	cfg                                train.Config
	patch, out, ckpt, resume, initFile string
	every, heldOut                     int
	lr                                 float64
	jsonOut                            bool
	tf                                 *transformFlags
}

func addTrainFlags(ctx *runContext) *trainFlags {
	fs := newFlags(ctx, "train", trainUsage)
	f := &trainFlags{fs: fs}
	c := &f.cfg
	fs.StringVar(&c.Game, "game", "", "game to train on: drive or paddle (required unless --resume)")
	fs.StringVar(&c.Variation, "variation", "", "game variation (default: the game's default)")
	fs.StringVar(&c.Net.Family, "family", "attention", "policy family: "+strings.Join(nets.Families, ", "))
	fs.StringVar(&f.patch, "patch", "8", "patch size N (or NxN) in pixels; training cuts square patches (e.g. --patch 8)")
	fs.StringVar(&c.Method, "method", "clone", "training method: clone (behaviour cloning with DAgger), cmaes or es")
	fs.DurationVar(&c.Budget, "budget", 5*time.Minute, "training time budget, e.g. 90s, 5m (stops at the next iteration boundary)")
	fs.IntVar(&c.Iters, "iters", 0, "stop after this many iterations (DAgger rounds or generations); 0 = until the budget or early stop. Use it for reproducible runs")
	fs.Uint64Var(&c.Seed, "seed", 1, "seed of the initial weights and of every random stream")
	fs.StringVar(&f.out, "out", "", "weights `FILE.safetensors` to write (required)")
	fs.StringVar(&f.ckpt, "checkpoint", "", "checkpoint file (default OUT.ckpt)")
	fs.IntVar(&f.every, "checkpoint-every", 1, "write the checkpoint every N iterations")
	fs.StringVar(&f.resume, "resume", "", "continue the run saved in this checkpoint exactly")
	fs.IntVar(&c.Workers, "workers", 0, "goroutines for episodes and gradients (default: all cores)")
	fs.BoolVar(&c.ForceWorkers, "force-workers", false, "accept --workers above 4 per core")
	fs.IntVar(&f.heldOut, "heldout", 50, "held-out episodes scored at the end (0 skips)")
	fs.BoolVar(&f.jsonOut, "json", false, "print one JSON object per iteration and a summary, instead of text")
	fs.StringVar(&f.initFile, "init", "", "start from these weights (e.g. behaviour-cloned, for --method es or cmaes)")
	addNetFlags(fs, &c.Net)
	fs.Float64Var(&f.lr, "lr", 0, "learning rate (default: clone 3e-3, es 0.01)")
	fs.IntVar(&c.Clone.Batch, "batch", 0, "clone: minibatch size (default 64)")
	fs.IntVar(&c.Clone.Epochs, "epochs", 0, "clone: epochs over the aggregated data per round (default 2)")
	fs.IntVar(&c.Clone.EpisodesPerRound, "episodes-per-round", 0, "clone: episodes collected per DAgger round (default 4)")
	fs.IntVar(&c.Patience, "patience", 0, "stop after this many validations without improvement (default: clone 8, es and cmaes 4; -1 never)")
	fs.IntVar(&c.MinIters, "min-iters", 0, "early stopping waits for this many iterations (default: clone 12, es and cmaes 0; -1 none)")
	fs.IntVar(&c.ES.Pairs, "pairs", 0, "es: antithetic pairs per generation (default 16)")
	fs.Float64Var(&c.ES.Sigma, "sigma", 0, "es/cmaes: noise / initial step size (default es 0.05, cmaes 0.1)")
	fs.Float64Var(&c.ES.WeightDecay, "weight-decay", 0.005, "es: L2 weight decay")
	fs.IntVar(&c.CMA.Population, "population", 0, "cmaes: population λ (default 4+⌊3 ln n⌋)")
	fs.IntVar(&c.FitnessEpisodes, "fitness-episodes", 0, "es/cmaes: episodes per fitness evaluation (default 2)")
	fs.IntVar(&c.ValEpisodes, "val-episodes", 0, "validation episodes for early stopping, on training seeds set aside (default 8)")
	// --every was train's name of the checkpoint interval; the scramble
	// schedule is not trained on (one permutation per episode).
	alias(fs, "every", "checkpoint-every")
	f.tf = addTransformFlags(fs, patch.Spec{}, "every")
	return f
}

// addNetFlags declares the network's hyper-parameters (train).
func addNetFlags(fs *flag.FlagSet, n *nets.Config) {
	fs.IntVar(&n.KeySize, "key-size", 0, "attention key size (default 16)")
	fs.IntVar(&n.Queries, "queries", 0, "attention queries (default 16)")
	fs.IntVar(&n.Hidden, "hidden", 0, "head hidden width (default 32)")
	fs.IntVar(&n.ValueSize, "value-size", 0, "attention value size (default 16)")
	fs.IntVar(&n.KeyHidden, "key-hidden", 0, "attention: hidden tanh layer of this width in the key function (default 0: linear keys)")
	fs.IntVar(&n.Context, "context", 0, "frames each token carries (temporal context k; default 1)")
	fs.BoolVar(&n.PrevAction, "prev-action", false, "give the policy the previous action")
	fs.BoolVar(&n.Centre, "centre", true, "subtract the token set's mean token from every token before the policy reads it (--centre=false turns it off)")
}

// trainer makes the trainer the flags ask for: a new one, or the one
// saved in --resume.
func (f *trainFlags) trainer() (*train.Trainer, error) {
	c := &f.cfg
	if f.resume != "" {
		return train.Resume(f.resume, c.Iters, c.Budget.Seconds())
	}
	augment, err := f.tf.Spec()
	if err != nil {
		return nil, fmt.Errorf("train: %w", err)
	}
	if c.Game == "" {
		return nil, usagef("train: --game is required (drive or paddle)")
	}
	if c.Patch, err = squarePatch(f.patch); err != nil {
		return nil, usagef("train: --patch: %v", err)
	}
	c.Augment = augment
	c.Clone.LR, c.ES.LR, c.CMA.Sigma = f.lr, f.lr, c.ES.Sigma
	if c.Budget == 0 {
		c.Budget = 5 * time.Minute
	}
	switch c.Method {
	case "clone", "cmaes", "es":
	default:
		return nil, usagef("train: --method %q: want clone, cmaes or es", c.Method)
	}
	if f.initFile != "" {
		if c.Init, err = nets.Load(f.initFile); err != nil {
			return nil, fmt.Errorf("--init: %w", err)
		}
	}
	tr, err := train.New(*c)
	if err != nil {
		return nil, usageError{fmt.Errorf("train: %w", err)}
	}
	return tr, nil
}

func runTrain(ctx *runContext, args []string) error {
	f := addTrainFlags(ctx)
	if err := parseFlags(f.fs, args); err != nil {
		return err
	}
	c := &f.cfg
	switch {
	case f.fs.NArg() > 0:
		return usagef("train: unexpected argument %q", f.fs.Arg(0))
	case f.out == "":
		return usagef("train: --out FILE.safetensors is required")
	case f.every < 1 || c.Iters < 0 || c.Budget < 0 || f.heldOut < 0 || c.Workers < 0 || c.ValEpisodes < 0 || c.FitnessEpisodes < 0:
		return usagef("train: --checkpoint-every must be ≥ 1 and --iters, --budget, --heldout, --workers, --val-episodes, --fitness-episodes ≥ 0")
	}
	if f.ckpt == "" {
		f.ckpt = f.out + ".ckpt"
	}
	if err := refuseZero(f.fs, "lr", "batch", "epochs", "episodes-per-round", "pairs", "sigma", "population", "fitness-episodes",
		"val-episodes", "key-size", "queries", "hidden", "value-size"); err != nil {
		return err
	}
	for _, p := range []string{f.out, f.ckpt} {
		if err := atomicfile.CheckFile(p); err != nil {
			return usagef("train: %v", err)
		}
	}
	if _, err := f.tf.Spec(); err != nil {
		return fmt.Errorf("train: %w", err)
	}
	tr, err := f.trainer()
	if err != nil {
		return err
	}
	enc := json.NewEncoder(ctx.stdout)
	res, err := f.run(ctx, tr, enc)
	if err != nil {
		return err
	}
	return f.finish(ctx, tr, res, enc)
}

// run trains with a progress bar and signal handling, keeping the
// checkpoint.
func (f *trainFlags) run(ctx *runContext, tr *train.Trainer, enc *json.Encoder) (train.Result, error) {
	cfg := tr.Config()
	sctx, stop := signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
	defer stop()
	total, unit := cfg.Iters, "iterations"
	if total == 0 {
		total, unit = int(cfg.Budget.Seconds()), "seconds"
	}
	bar := newProgress(ctx.stderr, total, "train "+cfg.Method)
	onIter := func(p train.Progress) {
		if unit == "iterations" {
			bar.Set(p.Iter)
		} else {
			bar.Set(int(p.Elapsed.Seconds()))
		}
		bar.Describe(fmt.Sprintf("%s iter %d  best %.1f  mean %.1f  left %s", cfg.Method, p.Iter, p.Best, p.Mean, p.Left.Round(time.Second)))
		if f.jsonOut {
			enc.Encode(iterJSON(p))
		}
	}
	res, err := tr.Run(sctx, onIter, f.every, func() error { return tr.SaveCheckpoint(f.ckpt) })
	bar.Done()
	if err != nil {
		if errors.Is(err, context.Canceled) {
			if cerr := tr.SaveCheckpoint(f.ckpt); cerr != nil {
				return res, fmt.Errorf("interrupted, and the checkpoint could not be written: %w", cerr)
			}
			return res, fmt.Errorf("interrupted after %d iterations: checkpoint written to %s (continue with --resume %s)", res.Iters, f.ckpt, f.ckpt)
		}
		return res, err
	}
	return res, tr.SaveCheckpoint(f.ckpt)
}

// finish scores the weights on held-out seeds, writes them and prints
// the outcome.
func (f *trainFlags) finish(ctx *runContext, tr *train.Trainer, res train.Result, enc *json.Encoder) error {
	cfg := tr.Config()
	var held, expert []float64
	var err error
	if f.heldOut > 0 {
		if held, err = tr.HeldOut(f.heldOut); err != nil {
			return err
		}
		if expert, err = tr.ExpertHeldOut(f.heldOut); err != nil {
			return err
		}
	}
	meta := tr.WeightsMeta(res, held, expert)
	if err := tr.WriteWeights(f.out, meta); err != nil {
		return err
	}
	if f.jsonOut {
		sum := map[string]any{
			"format": 1, "event": "done", "out": f.out, "checkpoint": f.ckpt, "game": cfg.Game, "family": cfg.Net.Family,
			"patch": cfg.Patch, "method": cfg.Method, "seed": cfg.Seed, "iters": res.Iters, "stopped": res.Stopped,
			"best_val": finite(res.BestVal), "elapsed_s": res.Elapsed.Seconds(), "heldout_episodes": len(held),
			"caution": vision.Caution,
		}
		if len(held) > 0 {
			sum["heldout_score"], sum["heldout_iqm"] = num(meta[weights.KeyHeldOutScore]), num(meta["heldout_iqm"])
			sum["expert_score"], sum["expert_iqm"] = num(meta["heldout_expert_score"]), num(meta["heldout_expert_iqm"])
		}
		return enc.Encode(sum)
	}
	fmt.Fprintf(ctx.stdout, "trained %s patch %d on %s by %s: %d iterations (%s) in %s, best validation %.1f\n",
		cfg.Net.Family, cfg.Patch, cfg.Game, cfg.Method, res.Iters, res.Stopped, res.Elapsed.Round(time.Second), res.BestVal)
	if len(held) > 0 {
		fmt.Fprintf(ctx.stdout, "held-out score over %d episodes: mean %s, IQM %s (scripted expert, reads game state: mean %s, IQM %s)\n",
			len(held), oneDecimal(meta[weights.KeyHeldOutScore]), oneDecimal(meta["heldout_iqm"]),
			oneDecimal(meta["heldout_expert_score"]), oneDecimal(meta["heldout_expert_iqm"]))
	}
	fmt.Fprintf(ctx.stdout, "wrote %s (checkpoint %s)\ncaution: %s\n", f.out, f.ckpt, vision.Caution)
	return nil
}

// oneDecimal shows a score kept as text in the weights' metadata with one
// decimal, as the other summaries do; text that is not a number is shown
// as it is.
func oneDecimal(s string) string {
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return s
	}
	return strconv.FormatFloat(v, 'f', 1, 64)
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

// squarePatch reads a --patch value in the grammar N or WxH and refuses a
// patch that is not square.
func squarePatch(s string) (int, error) {
	w, h, err := patch.ParseSize(s)
	if err != nil {
		return 0, err
	}
	if w != h {
		return 0, fmt.Errorf("%dx%d: want a square patch", w, h)
	}
	return w, nil
}

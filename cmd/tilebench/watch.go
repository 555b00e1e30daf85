package main

import (
	"context"
	"errors"
	"fmt"
	"os"
	"os/signal"
	"strings"
	"syscall"

	"tilebench/games"
	"tilebench/patch"
	"tilebench/vision"
	"tilebench/vision/overlay"
	"tilebench/vision/watch"
)

const watchUsage = `watch --game NAME [--policy P] [--occlude random:0.3] [--listen HOST:PORT]

Plays the game with the policy and serves a live page on this machine:
the game frame, the frame as the policy saw it, where its attention went,
the action and the running return, with controls to pause, step, change
the seed and change the occlusion severity. The page's address is printed;
Ctrl-C stops.

  tilebench watch --game drive --policy testdata/policies/drive-attention-p8.safetensors --occlude random:0.3

options:`

func init() {
	register(&command{name: "watch", summary: "watch a policy play, live in the browser, with its attention drawn", run: runWatch})
}

// watchContext is the context watch runs under: cancelled by Ctrl-C or
// SIGTERM. Tests replace it.
var watchContext = func() (context.Context, context.CancelFunc) {
	return signal.NotifyContext(context.Background(), os.Interrupt, syscall.SIGTERM)
}

func runWatch(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "watch", watchUsage)
	game := fs.String("game", "", "game to play: "+strings.Join(games.Names(), " or ")+" (e.g. --game drive)")
	policy := fs.String("policy", "expert", "policy: expert, a weights FILE.safetensors, or an external policy exec:COMMAND... / tcp://HOST:PORT (e.g. --policy drive-p8.safetensors)")
	seed := fs.Uint64("seed", games.HeldOutSeedStart, "game seed of the first episode; the next ones count up (e.g. --seed 1000000)")
	variation := fs.String("variation", "", "game variation, names joined with + (e.g. --variation glacier+clutter)")
	size := fs.String("size", "", "frame size WxH instead of the game's default (drive only) (e.g. --size 64x64)")
	patchSz := fs.String("patch", "", "patch size N or WxH; default the weights file's, else a size that divides the frame (e.g. --patch 8)")
	scramble := fs.String("scramble", "none", "token order: none, full, partial:F or local:K (e.g. --scramble full)")
	every := fs.Int("every", 0, "draw a new permutation every T steps; 0 draws one per episode (e.g. --every 10)")
	occlude := fs.String("occlude", "none", "hide tokens: none, random:R, block:R, bands:R, sweep:R or mask:FILE.png; the page changes R live (e.g. --occlude random:0.3)")
	fill := fs.String("fill", "black", "what an occluded token becomes: black, mean, noise or drop (e.g. --fill noise)")
	corrupt := fs.String("corrupt", "", corruptFlagHelp)
	fps := fs.Float64("fps", 20, "steps a second, 1 to 60 (e.g. --fps 10)")
	ov := fs.String("overlay", "attention+top:3", "what the attention panels draw: attention, top:K or attention+top:K (e.g. --overlay top:5)")
	listen := fs.String("listen", "", "address to serve on; default 127.0.0.1 on a free port. Another interface only when given here, with a warning (e.g. --listen 127.0.0.1:8080)")
	ext := addExternalFlags(fs)
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	switch {
	case fs.NArg() > 0:
		return usagef("watch: unexpected argument %q (options go before, as --name value)", fs.Arg(0))
	case *game == "":
		return usagef("watch: --game is required (%s)", strings.Join(games.Names(), " or "))
	case !(*fps >= 1 && *fps <= 60):
		return usagef("watch: --fps %v: want 1 to 60", *fps)
	}
	ovSpec, err := overlay.Parse(*ov)
	if err != nil {
		return usagef("watch: --overlay: %v", err)
	}
	spec := patch.Spec{Scramble: *scramble, Every: *every, Occlude: *occlude, Fill: *fill, Corrupt: *corrupt}
	if err := spec.Check(); err != nil {
		return usagef("watch: %v", err)
	}
	g, grid, pol, err := openWatchPolicy(*game, *variation, *size, *patchSz, *policy, ext)
	if err != nil {
		return err
	}
	defer closePolicy(pol)
	v, err := watch.New(watch.Config{Game: g, Grid: grid, Policy: pol, PolicyName: *policy, Spec: spec, Seed: *seed, FPS: *fps, Overlay: ovSpec})
	if err != nil {
		return usageError{err}
	}
	ln, url, warning, err := watch.Listen(*listen)
	if err != nil {
		return usagef("watch: --listen: %v", err)
	}
	if *listen != "" {
		v.AllowHost(*listen) // the name the user gave, as the browser will send it
	}
	if warning != "" {
		fmt.Fprintln(ctx.stderr, "tilebench: "+warning)
	}
	fmt.Fprintf(ctx.stdout, "watch: %s with %s at %s (Ctrl-C stops)\n", g.Spec().Name, *policy, url)
	sctx, cancel := watchContext()
	defer cancel()
	if err := v.Serve(sctx, ln); err != nil && !errors.Is(err, context.Canceled) {
		return fmt.Errorf("watch: %w", err)
	}
	return nil
}

// openWatchPolicy builds the game, the grid and the policy as play does.
func openWatchPolicy(game, variation, size, patchSz, policy string, ext *externalOptions) (games.Game, *patch.Grid, vision.Policy, error) {
	opt := games.Options{Variation: variation}
	if size != "" {
		w, h, err := patch.ParseSize(size)
		if err != nil {
			return nil, nil, nil, usagef("watch: --size: %v", err)
		}
		opt.Width, opt.Height = w, h
	}
	g, err := games.New(game, opt)
	if err != nil {
		return nil, nil, nil, usagef("watch: %v", err)
	}
	sp := g.Spec()
	pw := autoPatch(sp.Width, sp.Height)
	ph := pw
	if patchSz != "" {
		if pw, ph, err = patch.ParseSize(patchSz); err != nil {
			return nil, nil, nil, usagef("watch: --patch: %v", err)
		}
	}
	grid, err := patch.NewGrid(patch.GridConfig{Width: sp.Width, Height: sp.Height, PatchW: pw, PatchH: ph})
	if err != nil {
		return nil, nil, nil, usagef("watch: --patch: %v", err)
	}
	var pol vision.Policy
	if isWeightsFile(policy) {
		pol, grid, err = loadWeights(policy, g, grid, patchSz != "")
	} else {
		pol, err = loadPolicy(policy, g, grid, ext)
	}
	if err != nil {
		return nil, nil, nil, err
	}
	return g, grid, pol, nil
}

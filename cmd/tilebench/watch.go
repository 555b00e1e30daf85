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
	"tilebench/vision/overlay"
	"tilebench/vision/policies"
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
	seed := fs.Uint64("seed", games.HeldOutSeedStart, "game seed of the first episode; the next ones count up (e.g. --seed 1000000)")
	variation := fs.String("variation", "", "game variation, names joined with + (e.g. --variation tarn+clutter)")
	size := fs.String("size", "", "frame size WxH instead of the game's default (drive only) (e.g. --size 64x64)")
	patchSz := fs.String("patch", "", "patch size N or WxH; default the weights file's, else a size that divides the frame (e.g. --patch 8)")
	pf := policies.AddFlags(fs, policies.FlagConfig{Default: policies.Expert, InitSeed: true})
	tf := addTransformFlags(fs, patch.Spec{Scramble: "none", Occlude: "none", Fill: "black"})
	fps := fs.Float64("fps", 20, "steps a second, 1 to 60 (e.g. --fps 10)")
	ov := fs.String("overlay", "attention+top:3", "what the attention panels draw: attention, top:K or attention+top:K (e.g. --overlay top:5)")
	listen := fs.String("listen", "", "address to serve on; default 127.0.0.1 on a free port. Another interface only when given here, with a warning (e.g. --listen 127.0.0.1:8080)")
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
	spec, err := tf.Spec()
	if err != nil {
		return fmt.Errorf("watch: %w", err)
	}
	g, err := openGame(*game, *variation, *size)
	if err != nil {
		return fmt.Errorf("watch: %w", err)
	}
	pol, grid, err := openPolicy(pf, g, *patchSz)
	if err != nil {
		return fmt.Errorf("watch: %w", err)
	}
	defer policies.Close(pol)
	v, err := watch.New(watch.Config{Game: g, Grid: grid, Policy: pol, PolicyName: pf.Source, Spec: spec, Seed: *seed, FPS: *fps, Overlay: ovSpec})
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
	fmt.Fprintf(ctx.stdout, "watch: %s with %s at %s (Ctrl-C stops)\n", g.Spec().Name, pf.Source, url)
	sctx, cancel := watchContext()
	defer cancel()
	if err := v.Serve(sctx, ln); err != nil && !errors.Is(err, context.Canceled) {
		return fmt.Errorf("watch: %w", err)
	}
	return nil
}

package main

import (
	"encoding/json"
	"fmt"
	"strings"
	"text/tabwriter"

	"tilebench/games"
	_ "tilebench/games/all" // register the built-in games
	"tilebench/patch"
	"tilebench/vision/nets"
)

func init() {
	register(&command{name: "cost", summary: "compute cost of a policy family per patch size: parameters, FLOPs, memory, latency", run: runCost})
}

const costUsage = `cost [options]

For the frame size and action space of --game, and each patch size of
--patch, prints the cost of one step of a --family policy: its parameter
count, FLOPs per step (2·m·k·n for each m×k by k×n matrix product of the
forward pass, as in Golub & Van Loan; elementwise work not counted), the
activation memory of one forward pass, and the median latency per step
measured on this machine (one goroutine, random tokens).

  tilebench cost --game drive --family attention --patch 4,6,8,12,16
  tilebench cost --game paddle --family meanpool --patch 4,7,12 --json
  tilebench cost --game drive --family attention --key 32 --queries 8 --patch 8 --layers

options:`

// costRow is one patch size of the cost table.
type costRow struct {
	Patch       string           `json:"patch"`
	Cols        int              `json:"cols"`
	Rows        int              `json:"rows"`
	Tokens      int              `json:"tokens"`
	TokenDim    int              `json:"token_dim"`
	Params      int              `json:"params"`
	FLOPs       int64            `json:"flops"`
	ActBytes    int64            `json:"activation_bytes"`
	LatencyNS   int64            `json:"latency_ns,omitempty"`
	Layers      []nets.LayerCost `json:"layers"`
	Description string           `json:"grid"`
}

func runCost(ctx *runContext, args []string) error {
	fs := newFlags(ctx, "cost", costUsage)
	game := fs.String("game", "drive", "game whose frame size and action space to use: "+strings.Join(games.Names(), ", "))
	variation := fs.String("variation", "", "game variation (\"\" is the default)")
	family := fs.String("family", nets.Attention, "policy family: "+strings.Join(nets.Families, ", "))
	patches := fs.String("patch", "4,6,8,12,16", "comma-separated patch `SIZES`, each N or WxH")
	edge := fs.String("edge", "pad", "what to do when the patch size does not divide the frame: pad, crop or strict")
	key := fs.Int("key", 0, "key size (attention families; 0 = default 16)")
	keyHidden := fs.Int("key-hidden", 0, "width of a hidden layer in the key function (0 = linear key)")
	value := fs.String("value", "", "value function: linear (default) or identity")
	valueSize := fs.Int("value-size", 0, "width of a linear value (0 = default 16)")
	queries := fs.Int("queries", 0, "number of queries (0 = default 16)")
	hidden := fs.Int("hidden", 0, "width of the head's hidden layer (0 = default 32)")
	tokenHidden := fs.Int("token-hidden", 0, "width of meanpool's per-token layer (0 = default 32)")
	context := fs.Int("context", 0, "frames of temporal context per token (0 or 1 = current frame only)")
	prev := fs.Bool("prev-action", false, "give the policy the previous action")
	centre := fs.Bool("centre", true, "subtract the token set's mean token from every token, as tilebench train does by default (--centre=false: off)")
	reps := fs.Int("reps", 15, "latency samples per patch size (median reported); 0 skips the latency measurement")
	steps := fs.Int("steps", 20, "policy steps per latency sample")
	layers := fs.Bool("layers", false, "also print the cost of every layer")
	asJSON := fs.Bool("json", false, "print a machine-readable summary (\"format\": 1) instead of the table")
	if err := parseFlags(fs, args); err != nil {
		return err
	}
	if fs.NArg() > 0 {
		return usagef("cost: unexpected argument %q", fs.Arg(0))
	}
	if *reps < 0 || *steps < 1 || *reps > nets.MaxLatencySamples || *steps > nets.MaxLatencySteps {
		return usagef("cost: --reps %d --steps %d: want reps 0..%d and steps 1..%d", *reps, *steps, nets.MaxLatencySamples, nets.MaxLatencySteps)
	}
	e, err := patch.ParseEdge(*edge)
	if err != nil {
		return usagef("cost: --edge: %v", err)
	}
	g, err := games.New(*game, games.Options{Variation: *variation})
	if err != nil {
		return usagef("cost: --game: %v", err)
	}
	spec := g.Spec()
	cfg := nets.Config{Family: *family, KeySize: *key, KeyHidden: *keyHidden, Value: *value, ValueSize: *valueSize,
		Queries: *queries, Hidden: *hidden, TokenHidden: *tokenHidden, Context: *context, PrevAction: *prev, Centre: *centre}
	var sizes [][2]int
	for _, s := range strings.Split(*patches, ",") {
		w, h, err := patch.ParseSize(s)
		if err != nil {
			return usagef("cost: --patch: %v", err)
		}
		sizes = append(sizes, [2]int{w, h})
	}
	var rows []costRow
	prog := newProgress(ctx.stderr, len(sizes), "measuring")
	for i, sz := range sizes {
		grid, err := patch.NewGrid(patch.GridConfig{Width: spec.Width, Height: spec.Height, PatchW: sz[0], PatchH: sz[1], Edge: e})
		if err != nil {
			return usagef("cost: --patch %dx%d: %v", sz[0], sz[1], err)
		}
		c, err := nets.Estimate(cfg, grid, spec.Action)
		if err != nil {
			return usagef("cost: %v", err)
		}
		row := costRow{Patch: fmt.Sprintf("%dx%d", sz[0], sz[1]), Cols: grid.Cols, Rows: grid.Rows, Tokens: c.Tokens, TokenDim: c.TokenDim,
			Params: c.Params, FLOPs: c.FLOPs, ActBytes: c.ActivationBytes, Layers: c.Layers, Description: grid.String()}
		if *reps > 0 {
			n, err := nets.New(cfg, grid, spec.Action, 1)
			if err != nil {
				return usagef("cost: %v", err)
			}
			d, err := nets.MeasureLatency(n, nets.RandomObservation(grid, spec.Action, 2), *reps, *steps)
			if err != nil {
				return err
			}
			row.LatencyNS = d.Nanoseconds()
		}
		rows = append(rows, row)
		prog.Set(i + 1)
	}
	prog.Done()
	if *asJSON {
		out := map[string]any{"format": 1, "game": spec.Name, "frame": []int{spec.Width, spec.Height}, "family": cfg.Resolved().Family,
			"config": cfg.Resolved(), "action": spec.Action.Kind.String(), "flop_rule": "2·m·k·n per matrix product of the forward pass",
			"latency": map[string]any{"statistic": "median per step", "samples": *reps, "steps_per_sample": *steps}, "sizes": rows}
		enc := json.NewEncoder(ctx.stdout)
		enc.SetIndent("", " ")
		return enc.Encode(out)
	}
	fmt.Fprintf(ctx.stdout, "%s policy on %s (%dx%d frames, %s actions)\n", cfg.Resolved().Family, spec.Name, spec.Width, spec.Height, spec.Action.Kind)
	tw := tabwriter.NewWriter(ctx.stdout, 2, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintln(tw, "patch\tgrid\ttokens\ttoken dim\tparams\tMFLOP/step\tactivations KiB\tlatency µs\t")
	for _, r := range rows {
		lat := "-"
		if r.LatencyNS > 0 {
			lat = fmt.Sprintf("%.1f", float64(r.LatencyNS)/1e3)
		}
		fmt.Fprintf(tw, "%s\t%dx%d\t%d\t%d\t%d\t%.3f\t%.1f\t%s\t\n", r.Patch, r.Cols, r.Rows, r.Tokens, r.TokenDim, r.Params,
			float64(r.FLOPs)/1e6, float64(r.ActBytes)/1024, lat)
	}
	tw.Flush()
	if *layers {
		for _, r := range rows {
			fmt.Fprintf(ctx.stdout, "\npatch %s layers:\n", r.Patch)
			tw := tabwriter.NewWriter(ctx.stdout, 2, 4, 2, ' ', 0)
			fmt.Fprintln(tw, "  layer\tkind\tparams\tFLOPs\tactivations\t")
			for _, l := range r.Layers {
				fmt.Fprintf(tw, "  %s\t%s\t%d\t%d\t%d\t\n", l.Name, l.Kind, l.Params, l.FLOPs, l.Activations)
			}
			tw.Flush()
		}
	}
	fmt.Fprintln(ctx.stdout, "FLOPs: 2·m·k·n per matrix product of the forward pass; latency: median per step on this machine, one goroutine.")
	return nil
}
